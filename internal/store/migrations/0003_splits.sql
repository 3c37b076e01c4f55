-- splits tables: owned by the splits package (see DEVELOPERS.md "Tables").
CREATE TABLE ss_placeholder_splits(x);
