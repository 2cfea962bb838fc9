-- A patient's newest assessment, for the patient view's header. Measured by the scale bench: without it
-- the lookup walked assessments by time and the page's p95 grew with the years of history stored.
-- While the app runs: CREATE INDEX blocks writes to assessments until it is built (about a second per
-- million assessments on two cores); readers are not blocked.
CREATE INDEX "assessments_patient_idx" ON "assessments" USING btree ("patient_id","at");
