import { defineStore } from 'pinia';
import { api } from '../services/api-client';
import { uploadFile, uploadForm, type UploadProgress } from '../services/upload-client';
import type { ProvisionController, RelayMap as RelayMapBody } from '../../server/contracts/tokens';
import type { MoveResult, PlanWithMarkers, ProvisionResult, RelayMap, RotateResult, ServiceRecord, SitePlanView, ZoneCsvResult, ZoneMarker } from '../types/devices';
import type { Controller } from '../types/api';

type Progress = (p: UploadProgress) => void;
/** Where a service record belongs. */
export type RecordTarget = { kind: 'zone' | 'controller'; id: number };
const recordsPath = (t: RecordTarget) => `/${t.kind === 'zone' ? 'zones' : 'controllers'}/${t.id}/service-records`;

/**
 * The boards and the paperwork around them: provisioning, relay maps, site plans, zone CSV and
 * service records. Calls only; each screen keeps what it shows. Writes throw ApiError (quiet:
 * the screens show the server's message in place).
 */
export const useDevicesStore = defineStore('devices', () => {
  const quiet = { quiet: true };

  // --- provisioning (admin) ---
  const provision = (siteId: number, body: ProvisionController) => api.post<ProvisionResult>(`/sites/${siteId}/controllers/provision`, body, quiet);
  const rotateSecret = (id: number) => api.post<RotateResult>(`/controllers/${id}/rotate-secret`, undefined, quiet);
  const retire = (id: number) => api.post<Controller>(`/controllers/${id}/retire`, undefined, quiet);
  const move = (id: number, siteId: number) => api.post<MoveResult>(`/controllers/${id}/move`, { siteId }, quiet);

  // --- relay map ---
  const relayMap = (id: number) => api.get<RelayMap>(`/controllers/${id}/relays`, quiet);
  const saveRelayMap = (id: number, map: RelayMapBody['map']) => api.put<RelayMap>(`/controllers/${id}/relays`, { map }, quiet);

  // --- site plan ---
  const plan = (siteId: number) => api.get<PlanWithMarkers>(`/sites/${siteId}/plan/markers`, quiet);
  const uploadPlan = (siteId: number, file: File, onProgress: Progress) => uploadFile<SitePlanView>(`/sites/${siteId}/plan`, 'file', file, { onProgress, quiet: true });
  const saveMarkers = (siteId: number, markers: ZoneMarker[]) => api.put<{ markers: ZoneMarker[] }>(`/sites/${siteId}/plan/markers`, { markers }, quiet);

  // --- zones as CSV ---
  const importZones = (siteId: number, file: File, dryRun: boolean, onProgress: Progress) =>
    uploadFile<ZoneCsvResult>(`/sites/${siteId}/zones/import${dryRun ? '?dryRun=1' : ''}`, 'file', file, { onProgress, quiet: true });

  // --- service records ---
  const records = (t: RecordTarget) => api.get<{ items: ServiceRecord[] }>(recordsPath(t), quiet).then((r) => r.items);
  function addRecord(t: RecordTarget, body: { summary: string; details: string; photos: File[] }, onProgress: Progress): Promise<ServiceRecord> {
    const details = body.details.trim();
    if (!body.photos.length) return api.post<ServiceRecord>(recordsPath(t), details ? { summary: body.summary, details } : { summary: body.summary }, quiet);
    const form = new FormData();
    form.append('summary', body.summary);
    if (details) form.append('details', details);
    for (const f of body.photos) form.append('photos', f, f.name);
    return uploadForm<ServiceRecord>(recordsPath(t), form, { onProgress, quiet: true });
  }

  return { provision, rotateSecret, retire, move, relayMap, saveRelayMap, plan, uploadPlan, saveMarkers, importZones, records, addRecord };
});
