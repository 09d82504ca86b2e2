CREATE TYPE "public"."alert_severity" AS ENUM('critical', 'warning', 'info');--> statement-breakpoint
CREATE TYPE "public"."alert_state" AS ENUM('open', 'acknowledged', 'resolved');--> statement-breakpoint
CREATE TYPE "public"."mail_delivery" AS ENUM('immediate', 'daily_digest', 'off');--> statement-breakpoint
CREATE TABLE "water_use_daily" (
	"zone_id" integer NOT NULL,
	"date" date NOT NULL,
	"site_id" integer NOT NULL,
	"runs" integer DEFAULT 0 NOT NULL,
	"minutes" double precision DEFAULT 0 NOT NULL,
	"litres" double precision DEFAULT 0 NOT NULL,
	"measured_litres" double precision DEFAULT 0 NOT NULL,
	"estimated_litres" double precision DEFAULT 0 NOT NULL,
	"measured_runs" integer DEFAULT 0 NOT NULL,
	"not_as_planned" integer DEFAULT 0 NOT NULL,
	"updated_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "water_use_daily_pk" PRIMARY KEY("zone_id","date")
);
--> statement-breakpoint
CREATE TABLE "alerts" (
	"id" integer PRIMARY KEY GENERATED ALWAYS AS IDENTITY (sequence name "alerts_id_seq" INCREMENT BY 1 MINVALUE 1 MAXVALUE 2147483647 START WITH 1 CACHE 1),
	"site_id" integer NOT NULL,
	"controller_id" integer,
	"zone_id" integer,
	"kind" varchar(32) NOT NULL,
	"severity" "alert_severity" NOT NULL,
	"state" "alert_state" DEFAULT 'open' NOT NULL,
	"episode_key" varchar(120) NOT NULL,
	"title" varchar(200) NOT NULL,
	"message" text NOT NULL,
	"details" jsonb DEFAULT '{}'::jsonb NOT NULL,
	"opened_at" timestamp with time zone NOT NULL,
	"last_seen_at" timestamp with time zone NOT NULL,
	"acknowledged_at" timestamp with time zone,
	"acknowledged_by" integer,
	"resolved_at" timestamp with time zone,
	"resolution" text
);
--> statement-breakpoint
CREATE TABLE "mail_log" (
	"id" bigint PRIMARY KEY GENERATED ALWAYS AS IDENTITY (sequence name "mail_log_id_seq" INCREMENT BY 1 MINVALUE 1 MAXVALUE 9223372036854775807 START WITH 1 CACHE 1),
	"user_id" integer,
	"to_address" varchar(254) NOT NULL,
	"category" varchar(16) NOT NULL,
	"key" varchar(64) NOT NULL,
	"subject" varchar(300) NOT NULL,
	"message_id" varchar(300),
	"error" text,
	"sent_at" timestamp with time zone NOT NULL
);
--> statement-breakpoint
CREATE TABLE "mail_preferences" (
	"user_id" integer PRIMARY KEY NOT NULL,
	"alert_kinds" jsonb NOT NULL,
	"alert_delivery" "mail_delivery" NOT NULL,
	"weekly_summary" boolean NOT NULL,
	"updated_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
CREATE TABLE "mail_queue" (
	"id" bigint PRIMARY KEY GENERATED ALWAYS AS IDENTITY (sequence name "mail_queue_id_seq" INCREMENT BY 1 MINVALUE 1 MAXVALUE 9223372036854775807 START WITH 1 CACHE 1),
	"user_id" integer NOT NULL,
	"alert_id" integer NOT NULL,
	"kind" varchar(32) NOT NULL,
	"digest" boolean NOT NULL,
	"queued_at" timestamp with time zone NOT NULL,
	"sent_at" timestamp with time zone,
	"dropped_at" timestamp with time zone
);
--> statement-breakpoint
ALTER TABLE "water_use_daily" ADD CONSTRAINT "water_use_daily_zone_id_zones_id_fk" FOREIGN KEY ("zone_id") REFERENCES "public"."zones"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "water_use_daily" ADD CONSTRAINT "water_use_daily_site_id_sites_id_fk" FOREIGN KEY ("site_id") REFERENCES "public"."sites"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "alerts" ADD CONSTRAINT "alerts_site_id_sites_id_fk" FOREIGN KEY ("site_id") REFERENCES "public"."sites"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "alerts" ADD CONSTRAINT "alerts_controller_id_controllers_id_fk" FOREIGN KEY ("controller_id") REFERENCES "public"."controllers"("id") ON DELETE set null ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "alerts" ADD CONSTRAINT "alerts_zone_id_zones_id_fk" FOREIGN KEY ("zone_id") REFERENCES "public"."zones"("id") ON DELETE set null ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "alerts" ADD CONSTRAINT "alerts_acknowledged_by_users_id_fk" FOREIGN KEY ("acknowledged_by") REFERENCES "public"."users"("id") ON DELETE set null ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "mail_log" ADD CONSTRAINT "mail_log_user_id_users_id_fk" FOREIGN KEY ("user_id") REFERENCES "public"."users"("id") ON DELETE set null ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "mail_preferences" ADD CONSTRAINT "mail_preferences_user_id_users_id_fk" FOREIGN KEY ("user_id") REFERENCES "public"."users"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "mail_queue" ADD CONSTRAINT "mail_queue_user_id_users_id_fk" FOREIGN KEY ("user_id") REFERENCES "public"."users"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "mail_queue" ADD CONSTRAINT "mail_queue_alert_id_alerts_id_fk" FOREIGN KEY ("alert_id") REFERENCES "public"."alerts"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
CREATE INDEX "water_use_daily_site_date_idx" ON "water_use_daily" USING btree ("site_id","date");--> statement-breakpoint
CREATE UNIQUE INDEX "alerts_live_episode_uq" ON "alerts" USING btree ("episode_key") WHERE state <> 'resolved';--> statement-breakpoint
CREATE INDEX "alerts_site_opened_idx" ON "alerts" USING btree ("site_id","opened_at");--> statement-breakpoint
CREATE INDEX "alerts_state_opened_idx" ON "alerts" USING btree ("state","opened_at");--> statement-breakpoint
CREATE INDEX "mail_log_user_idx" ON "mail_log" USING btree ("user_id","category","key","sent_at");--> statement-breakpoint
CREATE UNIQUE INDEX "mail_log_once_uq" ON "mail_log" USING btree ("user_id","category","key") WHERE category <> 'alert';--> statement-breakpoint
CREATE INDEX "mail_queue_pending_idx" ON "mail_queue" USING btree ("user_id","kind") WHERE sent_at is null and dropped_at is null;