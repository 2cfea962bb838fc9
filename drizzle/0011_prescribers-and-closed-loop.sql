ALTER TYPE "public"."email_status" ADD VALUE 'undeliverable';--> statement-breakpoint
CREATE TABLE "account_setup_tokens" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"prescriber_id" uuid,
	"email" text NOT NULL,
	"token_hash" text NOT NULL,
	"expires_at" timestamp with time zone NOT NULL,
	"used_at" timestamp with time zone,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "account_setup_tokens_tokenHash_unique" UNIQUE("token_hash")
);
--> statement-breakpoint
CREATE TABLE "prescriber_identifiers" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"prescriber_id" uuid NOT NULL,
	"system" text NOT NULL,
	"value" text NOT NULL,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
CREATE TABLE "prescriber_roles" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"prescriber_id" uuid NOT NULL,
	"source_key" text NOT NULL,
	"role" text,
	"specialty" text,
	"organization" text,
	"email" text,
	"active" text,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	"updated_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "prescriber_roles_sourceKey_unique" UNIQUE("source_key")
);
--> statement-breakpoint
CREATE TABLE "prescribers" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"name" text NOT NULL,
	"email" text,
	"email_problem" text,
	"user_id" uuid,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	"updated_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
ALTER TABLE "recommendations" ALTER COLUMN "physician_id" DROP NOT NULL;--> statement-breakpoint
ALTER TABLE "recommendations" ADD COLUMN "recipient_prescriber_id" uuid;--> statement-breakpoint
ALTER TABLE "recommendations" ADD COLUMN "recipient_email" text;--> statement-breakpoint
ALTER TABLE "recommendations" ADD COLUMN "recipient_name" text;--> statement-breakpoint
-- recommendations sent so far all went to a physician's account: record where they went
UPDATE "recommendations" r SET "recipient_email" = u."email", "recipient_name" = u."display_name" FROM "users" u WHERE u."id" = r."physician_id";--> statement-breakpoint
ALTER TABLE "recommendations" ADD COLUMN "recipient_choice" text DEFAULT 'other' NOT NULL;--> statement-breakpoint
ALTER TABLE "recommendations" ADD COLUMN "reminder_count" integer DEFAULT 0 NOT NULL;--> statement-breakpoint
ALTER TABLE "recommendations" ADD COLUMN "escalated_at" timestamp with time zone;--> statement-breakpoint
ALTER TABLE "recommendations" ADD COLUMN "withdrawn_at" timestamp with time zone;--> statement-breakpoint
ALTER TABLE "recommendations" ADD COLUMN "withdrawn_by" uuid;--> statement-breakpoint
ALTER TABLE "recommendations" ADD COLUMN "withdrawn_reason" text;--> statement-breakpoint
ALTER TABLE "orders" ADD COLUMN "practitioner_id" uuid;--> statement-breakpoint
ALTER TABLE "outbound_emails" ADD COLUMN "resolution" text;--> statement-breakpoint
ALTER TABLE "outbound_emails" ADD COLUMN "resolved_at" timestamp with time zone;--> statement-breakpoint
ALTER TABLE "outbound_emails" ADD COLUMN "resolved_by" uuid;--> statement-breakpoint
ALTER TABLE "account_setup_tokens" ADD CONSTRAINT "account_setup_tokens_prescriber_id_prescribers_id_fk" FOREIGN KEY ("prescriber_id") REFERENCES "public"."prescribers"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "prescriber_identifiers" ADD CONSTRAINT "prescriber_identifiers_prescriber_id_prescribers_id_fk" FOREIGN KEY ("prescriber_id") REFERENCES "public"."prescribers"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "prescriber_roles" ADD CONSTRAINT "prescriber_roles_prescriber_id_prescribers_id_fk" FOREIGN KEY ("prescriber_id") REFERENCES "public"."prescribers"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "prescribers" ADD CONSTRAINT "prescribers_user_id_users_id_fk" FOREIGN KEY ("user_id") REFERENCES "public"."users"("id") ON DELETE set null ON UPDATE no action;--> statement-breakpoint
CREATE UNIQUE INDEX "prescriber_identifiers_system_value" ON "prescriber_identifiers" USING btree ("system","value");--> statement-breakpoint
CREATE INDEX "prescriber_identifiers_prescriber_idx" ON "prescriber_identifiers" USING btree ("prescriber_id");--> statement-breakpoint
CREATE INDEX "prescriber_roles_prescriber_idx" ON "prescriber_roles" USING btree ("prescriber_id");--> statement-breakpoint
CREATE INDEX "prescribers_email_idx" ON "prescribers" USING btree (lower("email"));--> statement-breakpoint
ALTER TABLE "recommendations" ADD CONSTRAINT "recommendations_recipient_prescriber_id_prescribers_id_fk" FOREIGN KEY ("recipient_prescriber_id") REFERENCES "public"."prescribers"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "recommendations" ADD CONSTRAINT "recommendations_withdrawn_by_users_id_fk" FOREIGN KEY ("withdrawn_by") REFERENCES "public"."users"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "orders" ADD CONSTRAINT "orders_practitioner_id_prescribers_id_fk" FOREIGN KEY ("practitioner_id") REFERENCES "public"."prescribers"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "outbound_emails" ADD CONSTRAINT "outbound_emails_resolved_by_users_id_fk" FOREIGN KEY ("resolved_by") REFERENCES "public"."users"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
CREATE INDEX "recommendations_recipient_email_idx" ON "recommendations" USING btree (lower("recipient_email"));--> statement-breakpoint
ALTER TABLE "recommendations" ADD CONSTRAINT "recommendation_has_recipient" CHECK ("recommendations"."physician_id" IS NOT NULL OR "recommendations"."recipient_email" IS NOT NULL);