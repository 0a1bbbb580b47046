-- A source note on every cost item and benefit driver (issue 13, decision pack): where the
-- figure comes from (a supplier's quote, a month of meter readings, the maintenance lead's
-- estimate), printed beside the input in a decision pack's assumptions. Empty for rows from
-- before this migration. Adding a column fires no UPDATE trigger, so approved versions stay
-- as approved.
ALTER TABLE cost_items ADD COLUMN source TEXT NOT NULL DEFAULT '' CHECK (length(source) <= 300);
ALTER TABLE benefit_drivers ADD COLUMN source TEXT NOT NULL DEFAULT '' CHECK (length(source) <= 300);
