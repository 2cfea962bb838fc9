CREATE TYPE "public"."role" AS ENUM('pharmacist', 'physician', 'admin');--> statement-breakpoint
CREATE TYPE "public"."feed_source" AS ENUM('fhir', 'csv', 'simulator', 'seed');--> statement-breakpoint
CREATE TYPE "public"."quarantine_status" AS ENUM('open', 'reprocessed', 'discarded');--> statement-breakpoint
CREATE TYPE "public"."flag_state" AS ENUM('new', 'in_review', 'snoozed', 'recommended', 'closed');--> statement-breakpoint
CREATE TYPE "public"."outcome" AS ENUM('accepted', 'modified', 'declined', 'no_action', 'superseded');--> statement-breakpoint
CREATE TYPE "public"."recommendation_status" AS ENUM('sent', 'accepted', 'modified', 'declined', 'withdrawn');--> statement-breakpoint
CREATE TYPE "public"."severity" AS ENUM('high', 'moderate', 'low');--> statement-breakpoint
CREATE TYPE "public"."analyte" AS ENUM('creatinine', 'albumin');--> statement-breakpoint
CREATE TYPE "public"."measurement_kind" AS ENUM('height', 'weight');--> statement-breakpoint
CREATE TYPE "public"."sex" AS ENUM('female', 'male');--> statement-breakpoint
CREATE TYPE "public"."order_status" AS ENUM('active', 'stopped');--> statement-breakpoint
CREATE TYPE "public"."route" AS ENUM('iv', 'po', 'im');--> statement-breakpoint
CREATE TYPE "public"."rule_version_status" AS ENUM('draft', 'active', 'retired');--> statement-breakpoint
CREATE TYPE "public"."email_status" AS ENUM('queued', 'sent', 'failed');--> statement-breakpoint
CREATE TABLE "agents" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"code" text NOT NULL,
	"rxnorm_code" text,
	"name" text NOT NULL,
	"agent_class" text NOT NULL,
	"synonyms" text[] DEFAULT '{}' NOT NULL,
	"params" jsonb NOT NULL,
	"provenance" jsonb DEFAULT '{}'::jsonb NOT NULL,
	"active" boolean DEFAULT true NOT NULL,
	"updated_by" uuid,
	"updated_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "agents_code_unique" UNIQUE("code")
);
--> statement-breakpoint
CREATE TABLE "audit_log" (
	"id" bigserial PRIMARY KEY NOT NULL,
	"at" timestamp with time zone DEFAULT now() NOT NULL,
	"actor_id" uuid,
	"actor_label" text NOT NULL,
	"action" text NOT NULL,
	"object_type" text NOT NULL,
	"object_id" text,
	"before" jsonb,
	"after" jsonb,
	"request_id" text
);
--> statement-breakpoint
CREATE TABLE "feed_tokens" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"name" text NOT NULL,
	"token_hash" text NOT NULL,
	"created_by" uuid,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	"last_used_at" timestamp with time zone,
	"revoked_at" timestamp with time zone,
	CONSTRAINT "feed_tokens_tokenHash_unique" UNIQUE("token_hash")
);
--> statement-breakpoint
CREATE TABLE "sessions" (
	"id" text PRIMARY KEY NOT NULL,
	"user_id" uuid NOT NULL,
	"expires_at" timestamp with time zone NOT NULL
);
--> statement-breakpoint
CREATE TABLE "sign_in_throttle" (
	"key" text PRIMARY KEY NOT NULL,
	"failures" integer DEFAULT 0 NOT NULL,
	"last_failure_at" timestamp with time zone DEFAULT now() NOT NULL,
	"locked_until" timestamp with time zone,
	CONSTRAINT "failures_non_negative" CHECK ("sign_in_throttle"."failures" >= 0)
);
--> statement-breakpoint
CREATE TABLE "users" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"email" text NOT NULL,
	"display_name" text NOT NULL,
	"role" "role" NOT NULL,
	"active" boolean DEFAULT true NOT NULL,
	"password_hash" text NOT NULL,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	"updated_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "users_email_unique" UNIQUE("email")
);
--> statement-breakpoint
CREATE TABLE "feed_messages" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"source" "feed_source" NOT NULL,
	"content_hash" text NOT NULL,
	"token_id" uuid,
	"uploaded_by" uuid,
	"raw" text NOT NULL,
	"entry_count" integer NOT NULL,
	"summary" jsonb DEFAULT '{}'::jsonb NOT NULL,
	"received_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "feed_messages_contentHash_unique" UNIQUE("content_hash")
);
--> statement-breakpoint
CREATE TABLE "quarantine" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"message_id" uuid,
	"source" "feed_source" NOT NULL,
	"entry_index" integer,
	"resource_type" text,
	"reason" text NOT NULL,
	"field" text,
	"raw" jsonb NOT NULL,
	"status" "quarantine_status" DEFAULT 'open' NOT NULL,
	"decided_by" uuid,
	"decided_at" timestamp with time zone,
	"decision_note" text,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
CREATE TABLE "flag_events" (
	"id" bigserial PRIMARY KEY NOT NULL,
	"flag_id" uuid NOT NULL,
	"actor_id" uuid,
	"kind" text NOT NULL,
	"from_state" "flag_state",
	"to_state" "flag_state",
	"note" text,
	"data" jsonb,
	"at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
CREATE TABLE "flags" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"order_id" uuid NOT NULL,
	"patient_id" uuid NOT NULL,
	"rule_key" text NOT NULL,
	"rule_version_id" uuid NOT NULL,
	"assessment_id" uuid NOT NULL,
	"state" "flag_state" DEFAULT 'new' NOT NULL,
	"outcome" "outcome",
	"severity" "severity" NOT NULL,
	"priority" double precision NOT NULL,
	"finding" text NOT NULL,
	"suggested_action" text,
	"facts" jsonb NOT NULL,
	"assigned_to" uuid,
	"snoozed_until" timestamp with time zone,
	"snooze_until_next_result" boolean DEFAULT false NOT NULL,
	"version" integer DEFAULT 1 NOT NULL,
	"opened_at" timestamp with time zone DEFAULT now() NOT NULL,
	"updated_at" timestamp with time zone DEFAULT now() NOT NULL,
	"first_action_at" timestamp with time zone,
	"closed_at" timestamp with time zone,
	CONSTRAINT "closed_has_outcome" CHECK (("flags"."state" = 'closed') = ("flags"."outcome" IS NOT NULL))
);
--> statement-breakpoint
CREATE TABLE "notifications" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"user_id" uuid NOT NULL,
	"text" text NOT NULL,
	"link" text,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	"read_at" timestamp with time zone
);
--> statement-breakpoint
CREATE TABLE "recommendations" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"flag_id" uuid NOT NULL,
	"pharmacist_id" uuid NOT NULL,
	"physician_id" uuid NOT NULL,
	"status" "recommendation_status" DEFAULT 'sent' NOT NULL,
	"message" text NOT NULL,
	"current" jsonb NOT NULL,
	"proposed" jsonb NOT NULL,
	"key_numbers" jsonb NOT NULL,
	"token_hash" text NOT NULL,
	"token_expires_at" timestamp with time zone NOT NULL,
	"token_used_at" timestamp with time zone,
	"response_regimen" jsonb,
	"response_reason" text,
	"responded_at" timestamp with time zone,
	"responded_via" text,
	"reminded_at" timestamp with time zone,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	"updated_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "recommendations_tokenHash_unique" UNIQUE("token_hash")
);
--> statement-breakpoint
CREATE TABLE "settings" (
	"key" text PRIMARY KEY NOT NULL,
	"value" jsonb NOT NULL,
	"updated_by" uuid,
	"updated_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
CREATE TABLE "body_measurements" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"patient_id" uuid NOT NULL,
	"kind" "measurement_kind" NOT NULL,
	"value" double precision NOT NULL,
	"unit" text NOT NULL,
	"value_normalised" double precision NOT NULL,
	"observed_at" timestamp with time zone NOT NULL,
	"source_id" text,
	"message_id" uuid,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "body_measurements_sourceId_unique" UNIQUE("source_id"),
	CONSTRAINT "measurement_positive" CHECK ("body_measurements"."value_normalised" > 0)
);
--> statement-breakpoint
CREATE TABLE "encounters" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"patient_id" uuid NOT NULL,
	"source_id" text,
	"ward" text NOT NULL,
	"bed" text,
	"admitted_at" timestamp with time zone NOT NULL,
	"discharged_at" timestamp with time zone,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	"updated_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "encounters_sourceId_unique" UNIQUE("source_id"),
	CONSTRAINT "discharge_after_admission" CHECK ("encounters"."discharged_at" IS NULL OR "encounters"."discharged_at" >= "encounters"."admitted_at")
);
--> statement-breakpoint
CREATE TABLE "lab_results" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"patient_id" uuid NOT NULL,
	"analyte" "analyte" NOT NULL,
	"loinc" text NOT NULL,
	"value" double precision NOT NULL,
	"unit" text NOT NULL,
	"value_normalised" double precision NOT NULL,
	"unit_normalised" text NOT NULL,
	"observed_at" timestamp with time zone NOT NULL,
	"source_id" text,
	"message_id" uuid,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "lab_results_sourceId_unique" UNIQUE("source_id"),
	CONSTRAINT "lab_value_positive" CHECK ("lab_results"."value_normalised" > 0)
);
--> statement-breakpoint
CREATE TABLE "patients" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"mrn" text NOT NULL,
	"source_id" text,
	"given_name" text NOT NULL,
	"family_name" text NOT NULL,
	"birth_date" date NOT NULL,
	"sex" "sex" NOT NULL,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	"updated_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "patients_mrn_unique" UNIQUE("mrn"),
	CONSTRAINT "patients_sourceId_unique" UNIQUE("source_id")
);
--> statement-breakpoint
CREATE TABLE "assessments" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"order_id" uuid NOT NULL,
	"patient_id" uuid NOT NULL,
	"at" timestamp with time zone NOT NULL,
	"complete" boolean NOT NULL,
	"crcl_ml_min" double precision,
	"half_life_h" double precision,
	"albumin_gl" double precision,
	"result" jsonb NOT NULL,
	"trace" jsonb NOT NULL,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
CREATE TABLE "orders" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"patient_id" uuid NOT NULL,
	"encounter_id" uuid,
	"agent_id" uuid NOT NULL,
	"source_id" text,
	"prescriber_id" uuid,
	"prescriber_name" text,
	"dose_mg" double precision NOT NULL,
	"interval_h" double precision NOT NULL,
	"infusion_h" double precision DEFAULT 0.5 NOT NULL,
	"route" "route" DEFAULT 'iv' NOT NULL,
	"status" "order_status" DEFAULT 'active' NOT NULL,
	"start_at" timestamp with time zone NOT NULL,
	"stopped_at" timestamp with time zone,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	"updated_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "orders_sourceId_unique" UNIQUE("source_id"),
	CONSTRAINT "order_dose_positive" CHECK ("orders"."dose_mg" > 0),
	CONSTRAINT "order_interval_positive" CHECK ("orders"."interval_h" > 0),
	CONSTRAINT "order_infusion_fits" CHECK ("orders"."infusion_h" >= 0 AND "orders"."infusion_h" <= "orders"."interval_h")
);
--> statement-breakpoint
CREATE TABLE "rule_versions" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"version" integer NOT NULL,
	"status" "rule_version_status" DEFAULT 'draft' NOT NULL,
	"rules" jsonb NOT NULL,
	"note" text,
	"based_on" uuid,
	"author_id" uuid,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	"published_at" timestamp with time zone,
	"published_by" uuid,
	CONSTRAINT "rule_versions_version_unique" UNIQUE("version")
);
--> statement-breakpoint
CREATE TABLE "outbound_emails" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"to_address" text NOT NULL,
	"subject" text NOT NULL,
	"html" text NOT NULL,
	"text" text NOT NULL,
	"status" "email_status" DEFAULT 'queued' NOT NULL,
	"attempts" integer DEFAULT 0 NOT NULL,
	"last_error" text,
	"smtp_message_id" text,
	"related_type" text,
	"related_id" text,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	"updated_at" timestamp with time zone DEFAULT now() NOT NULL,
	"sent_at" timestamp with time zone
);
--> statement-breakpoint
ALTER TABLE "agents" ADD CONSTRAINT "agents_updated_by_users_id_fk" FOREIGN KEY ("updated_by") REFERENCES "public"."users"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "audit_log" ADD CONSTRAINT "audit_log_actor_id_users_id_fk" FOREIGN KEY ("actor_id") REFERENCES "public"."users"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "feed_tokens" ADD CONSTRAINT "feed_tokens_created_by_users_id_fk" FOREIGN KEY ("created_by") REFERENCES "public"."users"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "sessions" ADD CONSTRAINT "sessions_user_id_users_id_fk" FOREIGN KEY ("user_id") REFERENCES "public"."users"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "feed_messages" ADD CONSTRAINT "feed_messages_token_id_feed_tokens_id_fk" FOREIGN KEY ("token_id") REFERENCES "public"."feed_tokens"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "feed_messages" ADD CONSTRAINT "feed_messages_uploaded_by_users_id_fk" FOREIGN KEY ("uploaded_by") REFERENCES "public"."users"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "quarantine" ADD CONSTRAINT "quarantine_message_id_feed_messages_id_fk" FOREIGN KEY ("message_id") REFERENCES "public"."feed_messages"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "quarantine" ADD CONSTRAINT "quarantine_decided_by_users_id_fk" FOREIGN KEY ("decided_by") REFERENCES "public"."users"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "flag_events" ADD CONSTRAINT "flag_events_flag_id_flags_id_fk" FOREIGN KEY ("flag_id") REFERENCES "public"."flags"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "flag_events" ADD CONSTRAINT "flag_events_actor_id_users_id_fk" FOREIGN KEY ("actor_id") REFERENCES "public"."users"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "flags" ADD CONSTRAINT "flags_order_id_orders_id_fk" FOREIGN KEY ("order_id") REFERENCES "public"."orders"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "flags" ADD CONSTRAINT "flags_patient_id_patients_id_fk" FOREIGN KEY ("patient_id") REFERENCES "public"."patients"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "flags" ADD CONSTRAINT "flags_rule_version_id_rule_versions_id_fk" FOREIGN KEY ("rule_version_id") REFERENCES "public"."rule_versions"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "flags" ADD CONSTRAINT "flags_assessment_id_assessments_id_fk" FOREIGN KEY ("assessment_id") REFERENCES "public"."assessments"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "flags" ADD CONSTRAINT "flags_assigned_to_users_id_fk" FOREIGN KEY ("assigned_to") REFERENCES "public"."users"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "notifications" ADD CONSTRAINT "notifications_user_id_users_id_fk" FOREIGN KEY ("user_id") REFERENCES "public"."users"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "recommendations" ADD CONSTRAINT "recommendations_flag_id_flags_id_fk" FOREIGN KEY ("flag_id") REFERENCES "public"."flags"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "recommendations" ADD CONSTRAINT "recommendations_pharmacist_id_users_id_fk" FOREIGN KEY ("pharmacist_id") REFERENCES "public"."users"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "recommendations" ADD CONSTRAINT "recommendations_physician_id_users_id_fk" FOREIGN KEY ("physician_id") REFERENCES "public"."users"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "settings" ADD CONSTRAINT "settings_updated_by_users_id_fk" FOREIGN KEY ("updated_by") REFERENCES "public"."users"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "body_measurements" ADD CONSTRAINT "body_measurements_patient_id_patients_id_fk" FOREIGN KEY ("patient_id") REFERENCES "public"."patients"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "body_measurements" ADD CONSTRAINT "body_measurements_message_id_feed_messages_id_fk" FOREIGN KEY ("message_id") REFERENCES "public"."feed_messages"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "encounters" ADD CONSTRAINT "encounters_patient_id_patients_id_fk" FOREIGN KEY ("patient_id") REFERENCES "public"."patients"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "lab_results" ADD CONSTRAINT "lab_results_patient_id_patients_id_fk" FOREIGN KEY ("patient_id") REFERENCES "public"."patients"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "lab_results" ADD CONSTRAINT "lab_results_message_id_feed_messages_id_fk" FOREIGN KEY ("message_id") REFERENCES "public"."feed_messages"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "assessments" ADD CONSTRAINT "assessments_order_id_orders_id_fk" FOREIGN KEY ("order_id") REFERENCES "public"."orders"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "assessments" ADD CONSTRAINT "assessments_patient_id_patients_id_fk" FOREIGN KEY ("patient_id") REFERENCES "public"."patients"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "orders" ADD CONSTRAINT "orders_patient_id_patients_id_fk" FOREIGN KEY ("patient_id") REFERENCES "public"."patients"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "orders" ADD CONSTRAINT "orders_encounter_id_encounters_id_fk" FOREIGN KEY ("encounter_id") REFERENCES "public"."encounters"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "orders" ADD CONSTRAINT "orders_agent_id_agents_id_fk" FOREIGN KEY ("agent_id") REFERENCES "public"."agents"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "orders" ADD CONSTRAINT "orders_prescriber_id_users_id_fk" FOREIGN KEY ("prescriber_id") REFERENCES "public"."users"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "rule_versions" ADD CONSTRAINT "rule_versions_author_id_users_id_fk" FOREIGN KEY ("author_id") REFERENCES "public"."users"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "rule_versions" ADD CONSTRAINT "rule_versions_published_by_users_id_fk" FOREIGN KEY ("published_by") REFERENCES "public"."users"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
CREATE INDEX "audit_log_at_idx" ON "audit_log" USING btree ("at");--> statement-breakpoint
CREATE INDEX "audit_log_actor_idx" ON "audit_log" USING btree ("actor_id","at");--> statement-breakpoint
CREATE INDEX "audit_log_object_idx" ON "audit_log" USING btree ("object_type","object_id");--> statement-breakpoint
CREATE INDEX "feed_messages_received_idx" ON "feed_messages" USING btree ("received_at");--> statement-breakpoint
CREATE INDEX "quarantine_status_idx" ON "quarantine" USING btree ("status","created_at");--> statement-breakpoint
CREATE INDEX "flag_events_flag_idx" ON "flag_events" USING btree ("flag_id","at");--> statement-breakpoint
CREATE UNIQUE INDEX "flags_one_open_per_order_rule" ON "flags" USING btree ("order_id","rule_key") WHERE "flags"."state" <> 'closed';--> statement-breakpoint
CREATE INDEX "flags_board_idx" ON "flags" USING btree ("state","priority");--> statement-breakpoint
CREATE INDEX "flags_patient_idx" ON "flags" USING btree ("patient_id");--> statement-breakpoint
CREATE INDEX "flags_opened_idx" ON "flags" USING btree ("opened_at");--> statement-breakpoint
CREATE INDEX "notifications_user_idx" ON "notifications" USING btree ("user_id","read_at");--> statement-breakpoint
CREATE INDEX "recommendations_physician_idx" ON "recommendations" USING btree ("physician_id","status");--> statement-breakpoint
CREATE INDEX "recommendations_flag_idx" ON "recommendations" USING btree ("flag_id");--> statement-breakpoint
CREATE INDEX "recommendations_created_idx" ON "recommendations" USING btree ("created_at");--> statement-breakpoint
CREATE INDEX "body_measurements_patient_idx" ON "body_measurements" USING btree ("patient_id","kind","observed_at");--> statement-breakpoint
CREATE INDEX "encounters_patient_idx" ON "encounters" USING btree ("patient_id","admitted_at");--> statement-breakpoint
CREATE INDEX "encounters_ward_idx" ON "encounters" USING btree ("ward");--> statement-breakpoint
CREATE INDEX "lab_results_patient_idx" ON "lab_results" USING btree ("patient_id","analyte","observed_at");--> statement-breakpoint
CREATE INDEX "lab_results_observed_idx" ON "lab_results" USING btree ("observed_at");--> statement-breakpoint
CREATE INDEX "assessments_order_idx" ON "assessments" USING btree ("order_id","at");--> statement-breakpoint
CREATE INDEX "assessments_at_idx" ON "assessments" USING btree ("at");--> statement-breakpoint
CREATE INDEX "orders_patient_idx" ON "orders" USING btree ("patient_id");--> statement-breakpoint
CREATE INDEX "orders_active_idx" ON "orders" USING btree ("status","patient_id");--> statement-breakpoint
CREATE UNIQUE INDEX "rule_versions_one_active" ON "rule_versions" USING btree ("status") WHERE "rule_versions"."status" = 'active';--> statement-breakpoint
CREATE INDEX "rule_versions_status_idx" ON "rule_versions" USING btree ("status");--> statement-breakpoint
CREATE INDEX "outbound_emails_status_idx" ON "outbound_emails" USING btree ("status","created_at");