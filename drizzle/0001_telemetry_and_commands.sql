CREATE TYPE "public"."command_state" AS ENUM('queued', 'sent', 'acked', 'failed', 'cancelled');--> statement-breakpoint
CREATE TYPE "public"."valve_source" AS ENUM('command', 'button', 'failsafe', 'server');--> statement-breakpoint
CREATE TABLE "commands" (
	"id" uuid PRIMARY KEY NOT NULL,
	"controller_id" integer NOT NULL,
	"zone_id" integer,
	"op" varchar(16) NOT NULL,
	"relay" smallint,
	"max_on_seconds" integer,
	"origin" varchar(16) NOT NULL,
	"requested_by" integer,
	"state" "command_state" DEFAULT 'queued' NOT NULL,
	"attempts" integer DEFAULT 0 NOT NULL,
	"error" varchar(300),
	"created_at" timestamp with time zone DEFAULT now() NOT NULL,
	"sent_at" timestamp with time zone,
	"acked_at" timestamp with time zone
);
--> statement-breakpoint
CREATE TABLE "readings" (
	"controller_id" integer NOT NULL,
	"at" timestamp with time zone NOT NULL,
	"board_at" timestamp with time zone NOT NULL,
	"received_at" timestamp with time zone NOT NULL,
	"seq" bigint NOT NULL,
	"rain" boolean NOT NULL,
	"moisture_raw" smallint NOT NULL,
	"moisture_pct" real NOT NULL,
	"supply_v" real NOT NULL,
	"flow_lpm" real,
	"rssi" smallint NOT NULL
);
--> statement-breakpoint
CREATE TABLE "valve_events" (
	"id" bigint PRIMARY KEY GENERATED ALWAYS AS IDENTITY (sequence name "valve_events_id_seq" INCREMENT BY 1 MINVALUE 1 MAXVALUE 9223372036854775807 START WITH 1 CACHE 1),
	"controller_id" integer NOT NULL,
	"zone_id" integer,
	"relay" smallint NOT NULL,
	"open" boolean NOT NULL,
	"source" "valve_source" NOT NULL,
	"command_id" uuid,
	"seq" bigint,
	"board_at" timestamp with time zone,
	"at" timestamp with time zone NOT NULL,
	"received_at" timestamp with time zone DEFAULT now() NOT NULL
);
--> statement-breakpoint
ALTER TABLE "controllers" ADD COLUMN "last_seq" bigint DEFAULT 0 NOT NULL;--> statement-breakpoint
ALTER TABLE "controllers" ADD COLUMN "seq_gaps" integer DEFAULT 0 NOT NULL;--> statement-breakpoint
ALTER TABLE "controllers" ADD COLUMN "clock_offset_ms" integer DEFAULT 0 NOT NULL;--> statement-breakpoint
ALTER TABLE "controllers" ADD COLUMN "rain_tripped" boolean DEFAULT false NOT NULL;--> statement-breakpoint
ALTER TABLE "commands" ADD CONSTRAINT "commands_controller_id_controllers_id_fk" FOREIGN KEY ("controller_id") REFERENCES "public"."controllers"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "commands" ADD CONSTRAINT "commands_zone_id_zones_id_fk" FOREIGN KEY ("zone_id") REFERENCES "public"."zones"("id") ON DELETE set null ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "commands" ADD CONSTRAINT "commands_requested_by_users_id_fk" FOREIGN KEY ("requested_by") REFERENCES "public"."users"("id") ON DELETE set null ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "valve_events" ADD CONSTRAINT "valve_events_controller_id_controllers_id_fk" FOREIGN KEY ("controller_id") REFERENCES "public"."controllers"("id") ON DELETE cascade ON UPDATE no action;--> statement-breakpoint
ALTER TABLE "valve_events" ADD CONSTRAINT "valve_events_zone_id_zones_id_fk" FOREIGN KEY ("zone_id") REFERENCES "public"."zones"("id") ON DELETE set null ON UPDATE no action;--> statement-breakpoint
CREATE INDEX "commands_controller_idx" ON "commands" USING btree ("controller_id","created_at");--> statement-breakpoint
CREATE INDEX "readings_at_brin" ON "readings" USING brin ("at");--> statement-breakpoint
CREATE INDEX "readings_controller_at_idx" ON "readings" USING btree ("controller_id","at");--> statement-breakpoint
CREATE INDEX "valve_events_zone_at_idx" ON "valve_events" USING btree ("zone_id","at");--> statement-breakpoint
CREATE INDEX "valve_events_controller_at_idx" ON "valve_events" USING btree ("controller_id","at");