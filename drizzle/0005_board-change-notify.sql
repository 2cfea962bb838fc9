-- The triage board's answers are cached in each app process; a change to anything a board row shows
-- tells every process through NOTIFY (delivered after commit, once per transaction), and they drop
-- their cached pages.
CREATE OR REPLACE FUNCTION ebbline_board_changed() RETURNS trigger AS $$
BEGIN
	PERFORM pg_notify('ebbline_board', '');
	RETURN NULL;
END;
$$ LANGUAGE plpgsql;
--> statement-breakpoint
CREATE TRIGGER flags_board_changed AFTER INSERT OR UPDATE OR DELETE OR TRUNCATE ON flags
	FOR EACH STATEMENT EXECUTE FUNCTION ebbline_board_changed();
--> statement-breakpoint
CREATE TRIGGER orders_board_changed AFTER INSERT OR UPDATE OR DELETE OR TRUNCATE ON orders
	FOR EACH STATEMENT EXECUTE FUNCTION ebbline_board_changed();
--> statement-breakpoint
CREATE TRIGGER patients_board_changed AFTER UPDATE OR DELETE OR TRUNCATE ON patients
	FOR EACH STATEMENT EXECUTE FUNCTION ebbline_board_changed();
--> statement-breakpoint
CREATE TRIGGER encounters_board_changed AFTER INSERT OR UPDATE OR DELETE OR TRUNCATE ON encounters
	FOR EACH STATEMENT EXECUTE FUNCTION ebbline_board_changed();
--> statement-breakpoint
CREATE TRIGGER agents_board_changed AFTER UPDATE OR DELETE OR TRUNCATE ON agents
	FOR EACH STATEMENT EXECUTE FUNCTION ebbline_board_changed();
--> statement-breakpoint
CREATE TRIGGER users_board_changed AFTER UPDATE OF display_name OR DELETE ON users
	FOR EACH STATEMENT EXECUTE FUNCTION ebbline_board_changed();
