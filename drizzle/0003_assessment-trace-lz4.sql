-- Assessments carry their calculation trace (about 15 kB of JSON each) and are written for every
-- re-assessed order. lz4 compresses these values several times faster than the default pglz, which
-- matters when a morning burst re-assesses thousands of orders; reading is faster too. Flags keep
-- their facts the same way. Existing rows keep their compression until rewritten.
ALTER TABLE "assessments" ALTER COLUMN "trace" SET COMPRESSION lz4;--> statement-breakpoint
ALTER TABLE "assessments" ALTER COLUMN "result" SET COMPRESSION lz4;--> statement-breakpoint
ALTER TABLE "flags" ALTER COLUMN "facts" SET COMPRESSION lz4;
