-- Finding items, owned by the leakage package (see DEVELOPERS.md "leakage: audit checks"):
-- the groups a finding involves when a group, not a row, is the unit — shared_entity lists
-- each shared entity and its row count per side here instead of its rows in ss_finding_rows.
-- first_row is the group's smallest T.ss_row on any side: a stable, type-exact identity
-- (the rows of a group are the table's rows with the entity value of its first_row).
CREATE TABLE ss_finding_items (
  audit_id  INTEGER NOT NULL,
  seq       INTEGER NOT NULL,
  first_row INTEGER NOT NULL,      -- the group's smallest T.ss_row
  side      TEXT NOT NULL,
  item      TEXT NOT NULL,         -- the entity value as text, or a linked entity's name (column=value)
  rows      INTEGER NOT NULL,      -- the group's rows on that side
  PRIMARY KEY (audit_id, seq, first_row, side)
) WITHOUT ROWID;
