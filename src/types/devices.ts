/** Shapes of the "running the firm" routes: provisioning, relay maps, site plans, zone CSV, service records. */
import type { RelayUse, RelayView } from '../../server/contracts/tokens';
import type { ServicePhotoView, ServiceRecordView, SitePlanView, ZoneCsvRowError, ZoneMarker } from '../../server/contracts/uploads';
import type { Controller } from './api';

export type { RelayUse, RelayView, ServicePhotoView, SitePlanView, ZoneCsvRowError, ZoneMarker };

/** POST /api/sites/:id/controllers/provision → 201. The secret is in this answer only. */
export type ProvisionResult = { controller: Controller; serial: string; secret: string; setupSheetUrl: string };

/** POST /api/controllers/:id/rotate-secret. */
export type RotateResult = { controllerId: number; serial: string; secret: string };

/** POST /api/controllers/:id/move. */
export type MoveResult = { controller: Controller; removedFromPrograms: number };

/** GET/PUT /api/controllers/:id/relays. */
export type RelayMap = { controllerId: number; serial: string; relayCount: number; masterValveRelay: number | null; relays: RelayView[] };

/** GET /api/sites/:id/plan/markers. */
export type PlanWithMarkers = { plan: SitePlanView | null; markers: ZoneMarker[] };

/** A zone row the import would add (the zone's fields, camelCase). */
export type ZoneCsvRow = {
  line: number;
  controllerSerial: string;
  controllerId: number;
  relay: number;
  name: string;
  plantType: string;
  soilTexture: string;
  headType: string;
  otherHeadType: string | null;
  headCount: number;
  flowPerHeadLpm: number;
  areaM2: number;
};

/** POST /api/sites/:id/zones/import[?dryRun=1]. */
export type ZoneCsvResult = {
  dryRun: boolean;
  saved: number;
  rowCount: number;
  validCount: number;
  errorCount: number;
  rows: ZoneCsvRow[];
  errors: ZoneCsvRowError[];
  zoneIds?: number[];
};

/** A note or a walk result; `details` is text for notes and an object for walk results. */
export type ServiceRecord = ServiceRecordView & { kind: 'note' | 'walk_test' };
