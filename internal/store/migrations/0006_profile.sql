-- profile tables (see DEVELOPERS.md "Tables").
CREATE TABLE ss_placeholder_profile(x);
