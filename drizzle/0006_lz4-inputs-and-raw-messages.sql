-- An assessment's stored inputs (0004) and each inbound message's raw text are written for every
-- re-assessed order and every feed message; lz4 compresses them several times faster than the
-- default pglz (as 0003 did for results and traces). Existing rows keep their compression.
ALTER TABLE "assessments" ALTER COLUMN "input" SET COMPRESSION lz4;--> statement-breakpoint
ALTER TABLE "feed_messages" ALTER COLUMN "raw" SET COMPRESSION lz4;
