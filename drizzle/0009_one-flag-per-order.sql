CREATE TABLE "flag_findings" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"flag_id" uuid NOT NULL,
	"rule_key" text NOT NULL,
	"rule_version_id" uuid NOT NULL,
	"severity" "severity" NOT NULL,
	"priority" double precision NOT NULL,
	"text" text NOT NULL,
	"suggested_action" text,
	"assessment_id" uuid NOT NULL,
	"raised_assessment_id" uuid NOT NULL,
	"raised_at" timestamp with time zone DEFAULT now() NOT NULL,
	"updated_at" timestamp with time zone DEFAULT now() NOT NULL,
	"resolved_at" timestamp with time zone,
	"resolved_assessment_id" uuid,
	"resolved_reason" text
);
--> statement-breakpoint
DROP INDEX "flags_one_open_per_order_rule";--> statement-breakpoint
ALTER TABLE "flags" ADD COLUMN "escalated_at" timestamp with time zone;--> statement-breakpoint
ALTER TABLE "flag_findings" ADD CONSTRAINT "flag_findings_flag_id_flags_id_fk" FOREIGN KEY ("flag_id") REFERENCES "public"."flags"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "flag_findings" ADD CONSTRAINT "flag_findings_rule_version_id_rule_versions_id_fk" FOREIGN KEY ("rule_version_id") REFERENCES "public"."rule_versions"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "flag_findings" ADD CONSTRAINT "flag_findings_assessment_id_assessments_id_fk" FOREIGN KEY ("assessment_id") REFERENCES "public"."assessments"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "flag_findings" ADD CONSTRAINT "flag_findings_raised_assessment_id_assessments_id_fk" FOREIGN KEY ("raised_assessment_id") REFERENCES "public"."assessments"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "flag_findings" ADD CONSTRAINT "flag_findings_resolved_assessment_id_assessments_id_fk" FOREIGN KEY ("resolved_assessment_id") REFERENCES "public"."assessments"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
-- Built before the data steps: deleting a merged flag cascades to its findings by flag_id, which
-- without this index reads every finding once per deleted flag.
CREATE INDEX "flag_findings_flag_idx" ON "flag_findings" USING btree ("flag_id");--> statement-breakpoint
-- Every existing flag becomes one finding. The finding keeps the flag's id, so a link or audit row that
-- names an old flag still leads to the flag now holding it. The event's assessment id is cast to uuid
-- (when it looks like one) so the lookup uses the assessments' primary key: comparing as text read the
-- whole table once per flag, which never finished on a year of history.
INSERT INTO "flag_findings" ("id", "flag_id", "rule_key", "rule_version_id", "severity", "priority", "text", "suggested_action",
	"assessment_id", "raised_assessment_id", "raised_at", "updated_at", "resolved_at", "resolved_assessment_id", "resolved_reason")
SELECT f."id", f."id", f."rule_key", f."rule_version_id", f."severity", f."priority", f."finding", f."suggested_action", f."assessment_id",
	coalesce((SELECT a."id" FROM "flag_events" e JOIN "assessments" a ON a."id" = (CASE WHEN e."data"->>'assessmentId' ~* '^[0-9a-f]{8}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{12}$' THEN (e."data"->>'assessmentId')::uuid END)
		WHERE e."flag_id" = f."id" AND e."kind" = 'opened' ORDER BY e."id" LIMIT 1), f."assessment_id"),
	f."opened_at", f."updated_at",
	CASE WHEN f."state" = 'closed' AND f."outcome" = 'superseded' THEN f."closed_at" END,
	CASE WHEN f."state" = 'closed' AND f."outcome" = 'superseded' THEN (SELECT a."id" FROM "flag_events" e JOIN "assessments" a ON a."id" = (CASE WHEN e."data"->>'assessmentId' ~* '^[0-9a-f]{8}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{4}-[0-9a-f]{12}$' THEN (e."data"->>'assessmentId')::uuid END)
		WHERE e."flag_id" = f."id" AND e."kind" = 'closed' ORDER BY e."id" DESC LIMIT 1) END,
	CASE WHEN f."state" = 'closed' AND f."outcome" = 'superseded' THEN coalesce((SELECT e."data"->>'reason' FROM "flag_events" e
		WHERE e."flag_id" = f."id" AND e."kind" = 'closed' ORDER BY e."id" DESC LIMIT 1), 'condition no longer holds') END
FROM "flags" f;
--> statement-breakpoint
-- Orders with several open flags keep one: the furthest along (recommended, in review, new, snoozed),
-- then the highest priority. The others' findings, events and recommendations move to it.
CREATE TEMP TABLE "flag_merge" ON COMMIT DROP AS
WITH ranked AS (
	SELECT f."id", f."order_id", row_number() OVER (PARTITION BY f."order_id"
		ORDER BY array_position(ARRAY['recommended','in_review','new','snoozed']::text[], f."state"::text), f."priority" DESC, f."opened_at", f."id") AS rn
	FROM "flags" f WHERE f."state" <> 'closed'
)
SELECT r."id" AS from_id, s."id" AS into_id FROM ranked r JOIN ranked s ON s."order_id" = r."order_id" AND s.rn = 1 WHERE r.rn > 1;
--> statement-breakpoint
CREATE INDEX ON "flag_merge" (into_id);
--> statement-breakpoint
ANALYZE "flag_merge";
--> statement-breakpoint
UPDATE "flag_findings" ff SET "flag_id" = m.into_id FROM "flag_merge" m WHERE ff."id" = m.from_id;
--> statement-breakpoint
UPDATE "flag_events" e SET "flag_id" = m.into_id, "data" = coalesce(e."data", '{}'::jsonb) || jsonb_build_object('findingId', m.from_id::text)
FROM "flag_merge" m WHERE e."flag_id" = m.from_id;
--> statement-breakpoint
UPDATE "recommendations" r SET "flag_id" = m.into_id FROM "flag_merge" m WHERE r."flag_id" = m.from_id;
--> statement-breakpoint
UPDATE "flags" f SET
	"assigned_to" = coalesce(f."assigned_to", (SELECT g."assigned_to" FROM "flag_merge" m JOIN "flags" g ON g."id" = m.from_id
		WHERE m.into_id = f."id" AND g."assigned_to" IS NOT NULL ORDER BY g."updated_at" DESC LIMIT 1)),
	"first_action_at" = least(f."first_action_at", (SELECT min(g."first_action_at") FROM "flag_merge" m JOIN "flags" g ON g."id" = m.from_id WHERE m.into_id = f."id")),
	"opened_at" = least(f."opened_at", (SELECT min(g."opened_at") FROM "flag_merge" m JOIN "flags" g ON g."id" = m.from_id WHERE m.into_id = f."id")),
	"version" = f."version" + 1,
	"updated_at" = now()
WHERE f."id" IN (SELECT into_id FROM "flag_merge");
--> statement-breakpoint
INSERT INTO "flag_events" ("flag_id", "actor_id", "kind", "from_state", "to_state", "data", "at")
SELECT m.into_id, NULL, 'merged', f."state", f."state", jsonb_build_object('findingIds', jsonb_agg(m.from_id::text ORDER BY m.from_id), 'reason', 'one flag per order'), now()
FROM "flag_merge" m JOIN "flags" f ON f."id" = m.into_id GROUP BY m.into_id, f."state";
--> statement-breakpoint
DELETE FROM "flags" f USING "flag_merge" m WHERE f."id" = m.from_id;
--> statement-breakpoint
-- An open flag's headline is its worst open finding.
UPDATE "flags" f SET "rule_key" = w."rule_key", "severity" = w."severity", "priority" = w."priority", "finding" = w."text", "suggested_action" = w."suggested_action"
FROM (SELECT DISTINCT ON (ff."flag_id") ff."flag_id", ff."rule_key", ff."severity", ff."priority", ff."text", ff."suggested_action"
	FROM "flag_findings" ff JOIN "flags" g ON g."id" = ff."flag_id" WHERE g."state" <> 'closed' AND ff."resolved_at" IS NULL
	ORDER BY ff."flag_id", ff."priority" DESC, ff."raised_at") w
WHERE f."id" = w."flag_id";
--> statement-breakpoint
CREATE UNIQUE INDEX "flag_findings_one_open_per_rule" ON "flag_findings" USING btree ("flag_id","rule_key") WHERE "flag_findings"."resolved_at" IS NULL;--> statement-breakpoint
CREATE INDEX "flag_findings_rule_idx" ON "flag_findings" USING btree ("rule_key","raised_at");--> statement-breakpoint
CREATE UNIQUE INDEX "flags_one_open_per_order" ON "flags" USING btree ("order_id") WHERE "flags"."state" <> 'closed';--> statement-breakpoint
-- A board row shows its flag's findings: a change to them drops the cached board pages too.
CREATE TRIGGER flag_findings_board_changed AFTER INSERT OR UPDATE OR DELETE OR TRUNCATE ON flag_findings
	FOR EACH STATEMENT EXECUTE FUNCTION ebbline_board_changed();
