-- leakage tables: owned by the leakage package (see DEVELOPERS.md "Tables").
CREATE TABLE ss_placeholder_leakage(x);
