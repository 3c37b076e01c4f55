-- estimate tables: owned by the estimate package (see DEVELOPERS.md "Tables").
CREATE TABLE ss_placeholder_estimate(x);
