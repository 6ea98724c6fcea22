-- A specimen code names one sample of a study whatever its capitals: the exact-case unique index gives way to a
-- case-blind one (the services already refuse case-variant codes; this keeps racing saves to one row).
DROP INDEX "samples_study_code_uq";--> statement-breakpoint
DROP INDEX "samples_study_code_lower_idx";--> statement-breakpoint
CREATE UNIQUE INDEX "samples_study_code_lower_uq" ON "samples" USING btree ("study_id",lower("code"));