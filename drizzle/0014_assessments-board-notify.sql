-- The board API names an order's newest assessment (GET /api/v1/flags?order=…), also for an order with
-- no flag: a new assessment drops the cached board pages too (once per statement, after commit).
CREATE TRIGGER assessments_board_changed AFTER INSERT OR DELETE OR TRUNCATE ON assessments
	FOR EACH STATEMENT EXECUTE FUNCTION ebbline_board_changed();
