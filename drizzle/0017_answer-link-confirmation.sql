CREATE TABLE "answer_link_codes" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"recommendation_id" uuid NOT NULL,
	"code_hash" text,
	"code_expires_at" timestamp with time zone NOT NULL,
	"attempts" integer DEFAULT 0 NOT NULL,
	"used_at" timestamp with time zone,
	"confirmation_hash" text,
	"confirmed_until" timestamp with time zone,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "answer_link_codes_confirmationHash_unique" UNIQUE("confirmation_hash")
);
--> statement-breakpoint
ALTER TABLE "recommendations" ADD COLUMN "token_revoked_at" timestamp with time zone;--> statement-breakpoint
ALTER TABLE "outbound_emails" ADD COLUMN "body_removed_at" timestamp with time zone;--> statement-breakpoint
ALTER TABLE "answer_link_codes" ADD CONSTRAINT "answer_link_codes_recommendation_id_recommendations_id_fk" FOREIGN KEY ("recommendation_id") REFERENCES "public"."recommendations"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
CREATE INDEX "answer_link_codes_recommendation_idx" ON "answer_link_codes" USING btree ("recommendation_id","created_at");