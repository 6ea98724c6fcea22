CREATE TABLE "import_logs" (
	"id" uuid PRIMARY KEY DEFAULT gen_random_uuid() NOT NULL,
	"laboratory_id" uuid NOT NULL,
	"study_id" uuid NOT NULL,
	"source" text NOT NULL,
	"attachment_id" uuid,
	"imported_by" text,
	"token_name" text,
	"row_count" integer NOT NULL,
	"samples_created" integer NOT NULL,
	"samples_updated" integer NOT NULL,
	"results_written" integer NOT NULL,
	"settings" jsonb DEFAULT '{}'::jsonb NOT NULL,
	"warnings" jsonb DEFAULT '[]'::jsonb NOT NULL,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "import_logs_source_ck" CHECK (source in ('csv', 'api')),
	CONSTRAINT "import_logs_actor_ck" CHECK ("import_logs"."imported_by" is not null or "import_logs"."token_name" is not null),
	CONSTRAINT "import_logs_counts_ck" CHECK ("import_logs"."row_count" >= 0 and "import_logs"."samples_created" >= 0 and "import_logs"."samples_updated" >= 0 and "import_logs"."results_written" >= 0)
);
--> statement-breakpoint
ALTER TABLE "import_logs" ADD CONSTRAINT "import_logs_laboratory_id_laboratories_id_fk" FOREIGN KEY ("laboratory_id") REFERENCES "public"."laboratories"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "import_logs" ADD CONSTRAINT "import_logs_study_id_studies_id_fk" FOREIGN KEY ("study_id") REFERENCES "public"."studies"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "import_logs" ADD CONSTRAINT "import_logs_attachment_id_attachments_id_fk" FOREIGN KEY ("attachment_id") REFERENCES "public"."attachments"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "import_logs" ADD CONSTRAINT "import_logs_imported_by_user_id_fk" FOREIGN KEY ("imported_by") REFERENCES "public"."user"("id") ON DELETE no action ON UPDATE no action;--> statement-breakpoint
CREATE INDEX "import_logs_lab_study_idx" ON "import_logs" USING btree ("laboratory_id","study_id","created_at");