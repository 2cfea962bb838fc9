DROP INDEX "flags_board_idx";--> statement-breakpoint
ALTER TABLE "assessments" ALTER COLUMN "trace" DROP NOT NULL;--> statement-breakpoint
ALTER TABLE "assessments" ADD COLUMN "input" jsonb;--> statement-breakpoint
CREATE INDEX "flags_open_priority_idx" ON "flags" USING btree ("priority","id") WHERE "flags"."state" <> 'closed';