CREATE TABLE "readings_hourly" (
	"controller_id" integer NOT NULL,
	"hour" timestamp with time zone NOT NULL,
	"n" integer NOT NULL,
	"moisture_sum" double precision NOT NULL,
	"moisture_min" real NOT NULL,
	"moisture_max" real NOT NULL,
	"supply_sum" double precision NOT NULL,
	"supply_min" real NOT NULL,
	"supply_max" real NOT NULL,
	"flow_n" integer NOT NULL,
	"flow_sum" double precision,
	"flow_min" real,
	"flow_max" real,
	"updated_at" timestamp with time zone DEFAULT now() NOT NULL,
	CONSTRAINT "readings_hourly_pk" PRIMARY KEY("controller_id","hour")
);
--> statement-breakpoint
ALTER TABLE "readings_hourly" ADD CONSTRAINT "readings_hourly_controller_id_controllers_id_fk" FOREIGN KEY ("controller_id") REFERENCES "public"."controllers"("id") ON DELETE cascade ON UPDATE no action;