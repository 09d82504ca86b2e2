CREATE TYPE "public"."supply_test_kind" AS ENUM('bucket', 'meter');--> statement-breakpoint
CREATE TYPE "public"."weather_source" AS ENUM('manual', 'csv', 'service');--> statement-breakpoint
CREATE TABLE "supply_tests" (
	"id" integer PRIMARY KEY GENERATED ALWAYS AS IDENTITY (sequence name "supply_tests_id_seq" INCREMENT BY 1 MINVALUE 1 MAXVALUE 2147483647 START WITH 1 CACHE 1),
	"site_id" integer NOT NULL,
	"kind" "supply_test_kind" NOT NULL,
	"volume_l" double precision,
	"seconds" double precision,
	"meter_start_l" double precision,
	"meter_end_l" double precision,
	"minutes" double precision,
	"flow_lpm" double precision NOT NULL,
	"static_pressure_kpa" double precision,
	"note" text DEFAULT '' NOT NULL,
	"applied" boolean DEFAULT false NOT NULL,
	"recorded_by" integer,
	"recorded_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
CREATE TABLE "weather_days" (
	"site_id" integer NOT NULL,
	"date" date NOT NULL,
	"tmax_c" double precision NOT NULL,
	"tmin_c" double precision NOT NULL,
	"rh_max_pct" double precision,
	"rh_min_pct" double precision,
	"wind_ms" double precision,
	"wind_height_m" double precision,
	"sunshine_h" double precision,
	"solar_mj" double precision,
	"rain_mm" double precision DEFAULT 0 NOT NULL,
	"et0_mm" double precision NOT NULL,
	"et0_method" text NOT NULL,
	"source" "weather_source" NOT NULL,
	"updated_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "weather_days_site_date_pk" PRIMARY KEY("site_id","date")
);
--> statement-breakpoint
ALTER TABLE "supply_tests" ADD CONSTRAINT "supply_tests_site_id_sites_id_fk" FOREIGN KEY ("site_id") REFERENCES "public"."sites"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "supply_tests" ADD CONSTRAINT "supply_tests_recorded_by_users_id_fk" FOREIGN KEY ("recorded_by") REFERENCES "public"."users"("id") ON DELETE set null ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "weather_days" ADD CONSTRAINT "weather_days_site_id_sites_id_fk" FOREIGN KEY ("site_id") REFERENCES "public"."sites"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
CREATE INDEX "supply_tests_site_idx" ON "supply_tests" USING btree ("site_id","recorded_at");