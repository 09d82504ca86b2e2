CREATE TYPE "public"."head_type" AS ENUM('spray', 'rotor', 'drip', 'bubbler');--> statement-breakpoint
CREATE TYPE "public"."plant_type" AS ENUM('cool_season_turf', 'warm_season_turf', 'shrubs', 'trees', 'groundcover', 'vegetables');--> statement-breakpoint
CREATE TYPE "public"."role" AS ENUM('admin', 'manager', 'technician', 'owner');--> statement-breakpoint
CREATE TYPE "public"."soil_texture" AS ENUM('sand', 'loamy_sand', 'sandy_loam', 'loam', 'silt_loam', 'clay_loam', 'clay');--> statement-breakpoint
CREATE TYPE "public"."unit_system" AS ENUM('metric', 'us');--> statement-breakpoint
CREATE TABLE "sites" (
	"id" integer PRIMARY KEY GENERATED ALWAYS AS IDENTITY (sequence name "sites_id_seq" INCREMENT BY 1 MINVALUE 1 MAXVALUE 2147483647 START WITH 1 CACHE 1),
	"name" varchar(120) NOT NULL,
	"address" varchar(300) DEFAULT '' NOT NULL,
	"timezone" varchar(64) NOT NULL,
	"latitude" double precision NOT NULL,
	"longitude" double precision NOT NULL,
	"elevation_m" double precision DEFAULT 0 NOT NULL,
	"supply_flow_lpm" double precision NOT NULL,
	"static_pressure_kpa" double precision NOT NULL,
	"supply_margin_pct" double precision DEFAULT 20 NOT NULL,
	"restrictions" jsonb DEFAULT '{"dayRule":"any","weekdays":[],"noWateringWindows":[]}'::jsonb NOT NULL,
	"notes" text DEFAULT '' NOT NULL,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	"updated_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
CREATE TABLE "sessions" (
	"sid" varchar PRIMARY KEY NOT NULL,
	"sess" json NOT NULL,
	"expire" timestamp (6) NOT NULL
);
--> statement-breakpoint
CREATE TABLE "site_members" (
	"site_id" integer NOT NULL,
	"user_id" integer NOT NULL,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "site_members_site_id_user_id_pk" PRIMARY KEY("site_id","user_id")
);
--> statement-breakpoint
CREATE TABLE "users" (
	"id" integer PRIMARY KEY GENERATED ALWAYS AS IDENTITY (sequence name "users_id_seq" INCREMENT BY 1 MINVALUE 1 MAXVALUE 2147483647 START WITH 1 CACHE 1),
	"email" varchar(254) NOT NULL,
	"name" varchar(120) NOT NULL,
	"password_hash" text,
	"role" "role" NOT NULL,
	"unit_system" "unit_system" DEFAULT 'metric' NOT NULL,
	"disabled" boolean DEFAULT false NOT NULL,
	"failed_sign_ins" integer DEFAULT 0 NOT NULL,
	"locked_until" timestamp with time zone,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	"updated_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "users_email_unique" UNIQUE("email")
);
--> statement-breakpoint
CREATE TABLE "controllers" (
	"id" integer PRIMARY KEY GENERATED ALWAYS AS IDENTITY (sequence name "controllers_id_seq" INCREMENT BY 1 MINVALUE 1 MAXVALUE 2147483647 START WITH 1 CACHE 1),
	"serial" varchar(32) NOT NULL,
	"name" varchar(120) NOT NULL,
	"site_id" integer NOT NULL,
	"relay_count" integer NOT NULL,
	"firmware_version" varchar(32) DEFAULT 'unknown' NOT NULL,
	"stagger_ms" integer DEFAULT 500 NOT NULL,
	"max_concurrent_valves" integer DEFAULT 1 NOT NULL,
	"master_valve_relay" integer,
	"has_flow_sensor" boolean DEFAULT false NOT NULL,
	"secret_hash" text,
	"online" boolean DEFAULT false NOT NULL,
	"last_seen_at" timestamp with time zone,
	"retired_at" timestamp with time zone,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	"updated_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "controllers_serial_unique" UNIQUE("serial")
);
--> statement-breakpoint
CREATE TABLE "zones" (
	"id" integer PRIMARY KEY GENERATED ALWAYS AS IDENTITY (sequence name "zones_id_seq" INCREMENT BY 1 MINVALUE 1 MAXVALUE 2147483647 START WITH 1 CACHE 1),
	"controller_id" integer NOT NULL,
	"relay" integer NOT NULL,
	"name" varchar(120) NOT NULL,
	"plant_type" "plant_type" NOT NULL,
	"soil_texture" "soil_texture" NOT NULL,
	"head_type" "head_type" NOT NULL,
	"head_count" integer NOT NULL,
	"flow_per_head_lpm" double precision NOT NULL,
	"area_m2" double precision NOT NULL,
	"root_depth_m" double precision NOT NULL,
	"efficiency" double precision DEFAULT 0.75 NOT NULL,
	"notes" text DEFAULT '' NOT NULL,
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	"updated_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "zones_controller_relay_uq" UNIQUE("controller_id","relay")
);
--> statement-breakpoint
CREATE TABLE "audit_log" (
	"id" bigint PRIMARY KEY GENERATED ALWAYS AS IDENTITY (sequence name "audit_log_id_seq" INCREMENT BY 1 MINVALUE 1 MAXVALUE 9223372036854775807 START WITH 1 CACHE 1),
	"at" timestamp with time zone DEFAULT now() NOT NULL,
	"actor_user_id" integer,
	"actor_label" varchar(254) NOT NULL,
	"ip" varchar(64),
	"action" varchar(64) NOT NULL,
	"entity_type" varchar(32) NOT NULL,
	"entity_id" varchar(64),
	"site_id" integer,
	"outcome" varchar(32) DEFAULT 'ok' NOT NULL,
	"before" jsonb,
	"after" jsonb
);
--> statement-breakpoint
ALTER TABLE "site_members" ADD CONSTRAINT "site_members_site_id_sites_id_fk" FOREIGN KEY ("site_id") REFERENCES "public"."sites"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "site_members" ADD CONSTRAINT "site_members_user_id_users_id_fk" FOREIGN KEY ("user_id") REFERENCES "public"."users"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "controllers" ADD CONSTRAINT "controllers_site_id_sites_id_fk" FOREIGN KEY ("site_id") REFERENCES "public"."sites"("id") ON DELETE restrict ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "zones" ADD CONSTRAINT "zones_controller_id_controllers_id_fk" FOREIGN KEY ("controller_id") REFERENCES "public"."controllers"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
CREATE INDEX "sessions_expire_idx" ON "sessions" USING btree ("expire");--> statement-breakpoint
CREATE INDEX "site_members_user_idx" ON "site_members" USING btree ("user_id");--> statement-breakpoint
CREATE INDEX "controllers_site_idx" ON "controllers" USING btree ("site_id");--> statement-breakpoint
CREATE INDEX "zones_controller_idx" ON "zones" USING btree ("controller_id");--> statement-breakpoint
CREATE INDEX "audit_log_at_idx" ON "audit_log" USING btree ("at");--> statement-breakpoint
CREATE INDEX "audit_log_site_idx" ON "audit_log" USING btree ("site_id","at");