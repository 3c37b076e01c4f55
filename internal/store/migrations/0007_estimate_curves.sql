-- estimate_curves tables (see DEVELOPERS.md "Tables").
CREATE TABLE ss_placeholder_estimate_curves(x);
