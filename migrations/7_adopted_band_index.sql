-- The bands with an adopted bulge luminosity are asked for on every placement and review
-- item: without this index that question scans every adopted value (300,000 rows in a
-- survey-sized catalog, about 19 ms each time); with it, only the luminosities.
create index adopted_value_quantity_band on adopted_value (quantity, band);
