CREATE TYPE "public"."cycle_soak" AS ENUM('off', 'auto', 'manual');--> statement-breakpoint
CREATE TYPE "public"."run_mode" AS ENUM('fixed', 'seasonal', 'weather');--> statement-breakpoint
CREATE TYPE "public"."run_state" AS ENUM('planned', 'running', 'completed', 'partial', 'held_rain', 'skipped_restriction', 'failed', 'cancelled');--> statement-breakpoint
CREATE TYPE "public"."zone_run_state" AS ENUM('planned', 'running', 'completed', 'stopped', 'held_rain', 'skipped_restriction', 'skipped_not_needed', 'failed');--> statement-breakpoint
CREATE TABLE "program_zones" (
	"id" integer PRIMARY KEY GENERATED ALWAYS AS IDENTITY (sequence name "program_zones_id_seq" INCREMENT BY 1 MINVALUE 1 MAXVALUE 2147483647 START WITH 1 CACHE 1),
	"program_id" integer NOT NULL,
	"zone_id" integer NOT NULL,
	"position" integer NOT NULL,
	"minutes" double precision NOT NULL,
	"cycle_soak" "cycle_soak" DEFAULT 'auto' NOT NULL,
	"cycle_minutes" double precision,
	"soak_minutes" double precision,
	CONSTRAINT "program_zones_uq" UNIQUE("program_id","zone_id")
);
--> statement-breakpoint
CREATE TABLE "programs" (
	"id" integer PRIMARY KEY GENERATED ALWAYS AS IDENTITY (sequence name "programs_id_seq" INCREMENT BY 1 MINVALUE 1 MAXVALUE 2147483647 START WITH 1 CACHE 1),
	"site_id" integer NOT NULL,
	"name" varchar(120) NOT NULL,
	"enabled" boolean DEFAULT true NOT NULL,
	"start_times" jsonb NOT NULL,
	"day_rule" jsonb NOT NULL,
	"crons" jsonb NOT NULL,
	"active_from" date,
	"active_to" date,
	"mode" "run_mode" DEFAULT 'fixed' NOT NULL,
	"seasonal_pct" integer DEFAULT 100 NOT NULL,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	"updated_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
CREATE TABLE "rain_delays" (
	"id" integer PRIMARY KEY GENERATED ALWAYS AS IDENTITY (sequence name "rain_delays_id_seq" INCREMENT BY 1 MINVALUE 1 MAXVALUE 2147483647 START WITH 1 CACHE 1),
	"site_id" integer NOT NULL,
	"starts_at" timestamp with time zone NOT NULL,
	"until" timestamp with time zone NOT NULL,
	"reason" varchar(300) DEFAULT '' NOT NULL,
	"created_by" integer,
	"cancelled_at" timestamp with time zone,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
CREATE TABLE "runs" (
	"id" integer PRIMARY KEY GENERATED ALWAYS AS IDENTITY (sequence name "runs_id_seq" INCREMENT BY 1 MINVALUE 1 MAXVALUE 2147483647 START WITH 1 CACHE 1),
	"site_id" integer NOT NULL,
	"program_id" integer,
	"kind" varchar(16) DEFAULT 'program' NOT NULL,
	"scheduled_for" timestamp with time zone NOT NULL,
	"state" "run_state" DEFAULT 'planned' NOT NULL,
	"reason" text,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	"ended_at" timestamp with time zone,
	CONSTRAINT "runs_program_slot_uq" UNIQUE("program_id","scheduled_for")
);
--> statement-breakpoint
CREATE TABLE "service_records" (
	"id" integer PRIMARY KEY GENERATED ALWAYS AS IDENTITY (sequence name "service_records_id_seq" INCREMENT BY 1 MINVALUE 1 MAXVALUE 2147483647 START WITH 1 CACHE 1),
	"site_id" integer NOT NULL,
	"zone_id" integer,
	"controller_id" integer,
	"kind" varchar(16) NOT NULL,
	"author_id" integer,
	"summary" text DEFAULT '' NOT NULL,
	"details" jsonb,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
CREATE TABLE "zone_runs" (
	"id" integer PRIMARY KEY GENERATED ALWAYS AS IDENTITY (sequence name "zone_runs_id_seq" INCREMENT BY 1 MINVALUE 1 MAXVALUE 2147483647 START WITH 1 CACHE 1),
	"run_id" integer NOT NULL,
	"site_id" integer NOT NULL,
	"zone_id" integer NOT NULL,
	"controller_id" integer NOT NULL,
	"position" integer NOT NULL,
	"cycle" smallint DEFAULT 0 NOT NULL,
	"planned_start" timestamp with time zone NOT NULL,
	"planned_end" timestamp with time zone NOT NULL,
	"planned_minutes" double precision NOT NULL,
	"actual_start" timestamp with time zone,
	"actual_end" timestamp with time zone,
	"actual_minutes" double precision,
	"estimated_litres" double precision,
	"measured_litres" double precision,
	"command_id" uuid,
	"state" "zone_run_state" DEFAULT 'planned' NOT NULL,
	"reason" text,
	CONSTRAINT "zone_runs_uq" UNIQUE("run_id","zone_id","cycle")
);
--> statement-breakpoint
ALTER TABLE "sites" ADD COLUMN "allow_parallel" boolean DEFAULT false NOT NULL;--> statement-breakpoint
ALTER TABLE "sites" ADD COLUMN "rain_delay_hours" double precision DEFAULT 24 NOT NULL;--> statement-breakpoint
ALTER TABLE "sites" ADD COLUMN "rain_cleared_at" timestamp with time zone;--> statement-breakpoint
ALTER TABLE "zones" ADD COLUMN "moisture_threshold_pct" double precision;--> statement-breakpoint
ALTER TABLE "program_zones" ADD CONSTRAINT "program_zones_program_id_programs_id_fk" FOREIGN KEY ("program_id") REFERENCES "public"."programs"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "program_zones" ADD CONSTRAINT "program_zones_zone_id_zones_id_fk" FOREIGN KEY ("zone_id") REFERENCES "public"."zones"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "programs" ADD CONSTRAINT "programs_site_id_sites_id_fk" FOREIGN KEY ("site_id") REFERENCES "public"."sites"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "rain_delays" ADD CONSTRAINT "rain_delays_site_id_sites_id_fk" FOREIGN KEY ("site_id") REFERENCES "public"."sites"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "rain_delays" ADD CONSTRAINT "rain_delays_created_by_users_id_fk" FOREIGN KEY ("created_by") REFERENCES "public"."users"("id") ON DELETE set null ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "runs" ADD CONSTRAINT "runs_site_id_sites_id_fk" FOREIGN KEY ("site_id") REFERENCES "public"."sites"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "runs" ADD CONSTRAINT "runs_program_id_programs_id_fk" FOREIGN KEY ("program_id") REFERENCES "public"."programs"("id") ON DELETE set null ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "service_records" ADD CONSTRAINT "service_records_site_id_sites_id_fk" FOREIGN KEY ("site_id") REFERENCES "public"."sites"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "service_records" ADD CONSTRAINT "service_records_zone_id_zones_id_fk" FOREIGN KEY ("zone_id") REFERENCES "public"."zones"("id") ON DELETE set null ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "service_records" ADD CONSTRAINT "service_records_controller_id_controllers_id_fk" FOREIGN KEY ("controller_id") REFERENCES "public"."controllers"("id") ON DELETE set null ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "service_records" ADD CONSTRAINT "service_records_author_id_users_id_fk" FOREIGN KEY ("author_id") REFERENCES "public"."users"("id") ON DELETE set null ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "zone_runs" ADD CONSTRAINT "zone_runs_run_id_runs_id_fk" FOREIGN KEY ("run_id") REFERENCES "public"."runs"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "zone_runs" ADD CONSTRAINT "zone_runs_zone_id_zones_id_fk" FOREIGN KEY ("zone_id") REFERENCES "public"."zones"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
CREATE INDEX "programs_site_idx" ON "programs" USING btree ("site_id");--> statement-breakpoint
CREATE INDEX "rain_delays_site_idx" ON "rain_delays" USING btree ("site_id","until");--> statement-breakpoint
CREATE INDEX "runs_site_time_idx" ON "runs" USING btree ("site_id","scheduled_for");--> statement-breakpoint
CREATE INDEX "service_records_site_idx" ON "service_records" USING btree ("site_id","created_at");--> statement-breakpoint
CREATE INDEX "service_records_zone_idx" ON "service_records" USING btree ("zone_id","created_at");--> statement-breakpoint
CREATE INDEX "zone_runs_zone_time_idx" ON "zone_runs" USING btree ("zone_id","planned_start");--> statement-breakpoint
CREATE INDEX "zone_runs_site_time_idx" ON "zone_runs" USING btree ("site_id","planned_start");