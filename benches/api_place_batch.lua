-- wrk script: POST a batch of 100 objects to /api/v1/place (benches/api_load.sh).
local objects = {}
for i = 1, 100 do
  local sigma = 120 + 2 * i
  objects[#objects + 1] = string.format(
    '{"sigma": "%d \\u00b1 10", "mass": "%de7", "bulge_mass": "1e11"}', sigma, i)
end
wrk.method = "POST"
wrk.body = "[" .. table.concat(objects, ",") .. "]"
wrk.headers["Content-Type"] = "application/json"
