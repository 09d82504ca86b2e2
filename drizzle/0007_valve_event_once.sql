-- Events stored twice before this index existed (a resend after a reconnect) keep their first row.
DELETE FROM "valve_events" a USING "valve_events" b WHERE a."controller_id" = b."controller_id" AND a."seq" = b."seq" AND a."id" > b."id";--> statement-breakpoint
CREATE UNIQUE INDEX "valve_events_controller_seq_uq" ON "valve_events" USING btree ("controller_id","seq") WHERE seq is not null;