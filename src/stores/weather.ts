import { defineStore } from 'pinia';
import { ref } from 'vue';
import { api } from '../services/api-client';
import { uploadFile, type UploadProgress } from '../services/upload-client';
import type { WeatherDayInput, WeatherFetch } from '../../server/contracts/weather';
import { addIsoDays } from '../components/weather/dates';
import type { CsvImportResult, WateringNeed, WeatherDay, WeatherFetchResult } from '../types/planning';

/** Weather of a site and the watering need computed from it. */
export const useWeatherStore = defineStore('weather', () => {
  const need = ref<WateringNeed | null>(null);
  /** Today at the site of the last answer (the default end of a watering-need period). */
  const siteToday = ref<string | null>(null);
  let asked = 0;

  const fetchNeed = (siteId: number, days: number, to?: string) =>
    api.get<WateringNeed>(`/sites/${siteId}/watering-need?days=${days}${to ? `&to=${to}` : ''}`, { quiet: true });

  /**
   * The watering need over the last `days` days. Today is still under way: when it has no
   * weather yet, the period ends yesterday, so "this week" is seven recorded days.
   * The latest request wins.
   */
  async function loadNeed(siteId: number, days: number): Promise<WateringNeed | null> {
    const n = ++asked;
    let res = await fetchNeed(siteId, days);
    const today = res.to;
    if (res.missingDates.includes(today) && res.daysWithWeather > 0) res = await fetchNeed(siteId, days, addIsoDays(today, -1));
    if (n !== asked) return null;
    need.value = res;
    siteToday.value = today;
    return res;
  }

  // Writes throw ApiError; forms show its field details.
  const saveDay = (siteId: number, date: string, body: Partial<WeatherDayInput>) =>
    api.put<WeatherDay & { created: boolean }>(`/sites/${siteId}/weather/${date}`, body);

  const importCsv = (siteId: number, file: File, dryRun: boolean, onProgress?: (p: UploadProgress) => void) =>
    uploadFile<CsvImportResult>(`/sites/${siteId}/weather/import${dryRun ? '?dryRun=1' : ''}`, 'file', file, { onProgress, quiet: true });

  const fetchFromService = (siteId: number, body: Partial<WeatherFetch>) =>
    api.post<WeatherFetchResult>(`/sites/${siteId}/weather/fetch`, body);

  function clear(): void {
    need.value = null;
  }

  return { need, siteToday, loadNeed, saveDay, importCsv, fetchFromService, clear };
});
