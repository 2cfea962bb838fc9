CREATE TYPE "public"."administration_status" AS ENUM('completed', 'in-progress', 'stopped', 'entered-in-error');--> statement-breakpoint
CREATE TYPE "public"."level_timing" AS ENUM('trough', 'peak', 'random');--> statement-breakpoint
CREATE TABLE "drug_levels" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"patient_id" uuid NOT NULL,
	"agent_id" uuid NOT NULL,
	"loinc" text NOT NULL,
	"timing" "level_timing" NOT NULL,
	"value" double precision NOT NULL,
	"unit" text NOT NULL,
	"value_mg_l" double precision NOT NULL,
	"observed_at" timestamp with time zone NOT NULL,
	"source_id" text,
	"message_id" uuid,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "drug_levels_sourceId_unique" UNIQUE("source_id"),
	CONSTRAINT "drug_level_value_not_negative" CHECK ("drug_levels"."value_mg_l" >= 0)
);
--> statement-breakpoint
CREATE TABLE "medication_administrations" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"patient_id" uuid NOT NULL,
	"order_id" uuid NOT NULL,
	"agent_id" uuid NOT NULL,
	"status" "administration_status" DEFAULT 'completed' NOT NULL,
	"start_at" timestamp with time zone NOT NULL,
	"end_at" timestamp with time zone,
	"dose_value" double precision NOT NULL,
	"dose_unit" text NOT NULL,
	"dose_mg" double precision NOT NULL,
	"source_id" text,
	"message_id" uuid,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	"updated_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "medication_administrations_sourceId_unique" UNIQUE("source_id"),
	CONSTRAINT "administration_dose_positive" CHECK ("medication_administrations"."dose_mg" > 0),
	CONSTRAINT "administration_period" CHECK ("medication_administrations"."end_at" IS NULL OR "medication_administrations"."end_at" >= "medication_administrations"."start_at")
);
--> statement-breakpoint
ALTER TABLE "drug_levels" ADD CONSTRAINT "drug_levels_patient_id_patients_id_fk" FOREIGN KEY ("patient_id") REFERENCES "public"."patients"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "drug_levels" ADD CONSTRAINT "drug_levels_agent_id_agents_id_fk" FOREIGN KEY ("agent_id") REFERENCES "public"."agents"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "drug_levels" ADD CONSTRAINT "drug_levels_message_id_feed_messages_id_fk" FOREIGN KEY ("message_id") REFERENCES "public"."feed_messages"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "medication_administrations" ADD CONSTRAINT "medication_administrations_patient_id_patients_id_fk" FOREIGN KEY ("patient_id") REFERENCES "public"."patients"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "medication_administrations" ADD CONSTRAINT "medication_administrations_order_id_orders_id_fk" FOREIGN KEY ("order_id") REFERENCES "public"."orders"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "medication_administrations" ADD CONSTRAINT "medication_administrations_agent_id_agents_id_fk" FOREIGN KEY ("agent_id") REFERENCES "public"."agents"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "medication_administrations" ADD CONSTRAINT "medication_administrations_message_id_feed_messages_id_fk" FOREIGN KEY ("message_id") REFERENCES "public"."feed_messages"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
CREATE INDEX "drug_levels_patient_idx" ON "drug_levels" USING btree ("patient_id","agent_id","observed_at");--> statement-breakpoint
CREATE INDEX "drug_levels_observed_idx" ON "drug_levels" USING btree ("observed_at");--> statement-breakpoint
CREATE INDEX "medication_administrations_order_idx" ON "medication_administrations" USING btree ("order_id","start_at");--> statement-breakpoint
CREATE INDEX "medication_administrations_patient_idx" ON "medication_administrations" USING btree ("patient_id","start_at");