CREATE TYPE "public"."renal_replacement_kind" AS ENUM('session', 'condition', 'set', 'clear');--> statement-breakpoint
CREATE TYPE "public"."renal_replacement_mode" AS ENUM('ihd', 'pd', 'crrt');--> statement-breakpoint
CREATE TABLE "renal_replacement_events" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"patient_id" uuid NOT NULL,
	"kind" "renal_replacement_kind" NOT NULL,
	"mode" "renal_replacement_mode",
	"from_at" timestamp with time zone NOT NULL,
	"to_at" timestamp with time zone,
	"source_id" text,
	"message_id" uuid,
	"set_by" uuid,
	"reason" text,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "renal_replacement_events_sourceId_unique" UNIQUE("source_id"),
	CONSTRAINT "renal_replacement_mode_given" CHECK ("renal_replacement_events"."kind" = 'clear' OR "renal_replacement_events"."mode" IS NOT NULL),
	CONSTRAINT "renal_replacement_period" CHECK ("renal_replacement_events"."to_at" IS NULL OR "renal_replacement_events"."to_at" >= "renal_replacement_events"."from_at")
);
--> statement-breakpoint
ALTER TABLE "renal_replacement_events" ADD CONSTRAINT "renal_replacement_events_patient_id_patients_id_fk" FOREIGN KEY ("patient_id") REFERENCES "public"."patients"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "renal_replacement_events" ADD CONSTRAINT "renal_replacement_events_message_id_feed_messages_id_fk" FOREIGN KEY ("message_id") REFERENCES "public"."feed_messages"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "renal_replacement_events" ADD CONSTRAINT "renal_replacement_events_set_by_users_id_fk" FOREIGN KEY ("set_by") REFERENCES "public"."users"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
CREATE INDEX "renal_replacement_events_patient_idx" ON "renal_replacement_events" USING btree ("patient_id","from_at");