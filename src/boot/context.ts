import type { App } from 'vue';
import type { Pinia } from 'pinia';
import type { Router } from 'vue-router';

/** What every boot module's install(ctx) receives from main.ts. */
export type BootContext = { app: App; pinia: Pinia; router: Router };
