CREATE TABLE "access_log" (
	"id" bigserial PRIMARY KEY NOT NULL,
	"at" timestamp with time zone DEFAULT now() NOT NULL,
	"actor_id" uuid,
	"actor_label" text NOT NULL,
	"role" text,
	"kind" text NOT NULL,
	"object_id" text,
	"patient_id" uuid,
	"route" text NOT NULL,
	"status" integer NOT NULL,
	"request_id" text
);
--> statement-breakpoint
ALTER TABLE "access_log" ADD CONSTRAINT "access_log_actor_id_users_id_fk" FOREIGN KEY ("actor_id") REFERENCES "public"."users"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
CREATE INDEX "access_log_at_idx" ON "access_log" USING btree ("at");--> statement-breakpoint
CREATE INDEX "access_log_actor_idx" ON "access_log" USING btree ("actor_id","at");--> statement-breakpoint
CREATE INDEX "access_log_patient_idx" ON "access_log" USING btree ("patient_id","at");--> statement-breakpoint
-- The access log cannot be altered; rows may only be deleted once more than 400 days old (retention).
CREATE OR REPLACE FUNCTION access_log_reject_change() RETURNS trigger AS $$
BEGIN
	IF TG_OP = 'DELETE' AND OLD.at < now() - interval '400 days' THEN
		RETURN OLD;
	END IF;
	RAISE EXCEPTION 'access_log is append-only: % is not allowed', TG_OP USING ERRCODE = 'insufficient_privilege';
END;
$$ LANGUAGE plpgsql;
--> statement-breakpoint
CREATE TRIGGER access_log_no_update_delete
	BEFORE UPDATE OR DELETE ON access_log
	FOR EACH ROW EXECUTE FUNCTION access_log_reject_change();
--> statement-breakpoint
CREATE TRIGGER access_log_no_truncate
	BEFORE TRUNCATE ON access_log
	FOR EACH STATEMENT EXECUTE FUNCTION access_log_reject_change();
