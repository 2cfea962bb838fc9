ALTER TABLE "recommendations" ADD COLUMN "findings" jsonb DEFAULT '[]'::jsonb NOT NULL;--> statement-breakpoint
-- Recommendations sent before this column: the findings their flag held when they were sent (raised by
-- then and not resolved before). Rule titles were not kept; the key stands in for the title.
UPDATE "recommendations" r SET "findings" = coalesce((
	SELECT jsonb_agg(jsonb_build_object('ruleKey', ff."rule_key", 'ruleTitle', ff."rule_key", 'severity', ff."severity", 'text', ff."text")
		ORDER BY array_position(ARRAY['high','moderate','low']::text[], ff."severity"::text), ff."priority" DESC)
	FROM "flag_findings" ff
	WHERE ff."flag_id" = r."flag_id" AND ff."raised_at" <= r."created_at" AND (ff."resolved_at" IS NULL OR ff."resolved_at" > r."created_at")
), '[]'::jsonb);
