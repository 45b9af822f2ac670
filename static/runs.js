// Follows the bootstrap and posterior runs shown on a relation page: every 2 seconds it asks
// the server where each waiting or running run stands (GET /api/v1/runs/{id}, readable with
// the page's session), writes the count done into the progress line (an aria-live region),
// and reloads the page once a run has started, finished, failed or been cancelled, so the
// result is shown. Without script the page reloads itself every 5 seconds instead.
(function () {
  "use strict";
  var lines = document.querySelectorAll("[data-run-id]");
  if (lines.length === 0) {
    return;
  }
  var every = 2000;
  var failures = 0;

  function reload() {
    window.location.reload();
  }

  function check(line) {
    var id = line.getAttribute("data-run-id");
    var shown = line.getAttribute("data-run-status");
    return fetch("/api/v1/runs/" + encodeURIComponent(id), {
      credentials: "same-origin",
      headers: { Accept: "application/json" }
    }).then(function (answer) {
      if (answer.status === 404) {
        // The server no longer knows the run (a restart): the page says what it has.
        return true;
      }
      if (!answer.ok) {
        throw new Error("status " + answer.status);
      }
      return answer.json().then(function (run) {
        if (run.status !== shown) {
          return true;
        }
        if (run.status === "running" && typeof run.done === "number") {
          var done = line.querySelector(".run-done");
          if (done && done.textContent !== String(run.done)) {
            done.textContent = String(run.done);
          }
        }
        return false;
      });
    });
  }

  function round() {
    var checks = Array.prototype.map.call(lines, check);
    Promise.all(checks).then(function (changed) {
      failures = 0;
      if (changed.indexOf(true) >= 0) {
        reload();
      } else {
        window.setTimeout(round, every);
      }
    }, function () {
      failures += 1;
      // After a few failed asks, fall back to reloading the page.
      if (failures >= 3) {
        reload();
      } else {
        window.setTimeout(round, every * 2);
      }
    });
  }

  window.setTimeout(round, every);
})();
