ALTER TABLE "sites" ADD COLUMN "coastal" boolean DEFAULT false NOT NULL;--> statement-breakpoint
ALTER TABLE "zones" ADD COLUMN "other_head_type" "head_type";