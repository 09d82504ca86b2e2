import { createApp } from 'vue';
import { Dialog, Loading, Notify, Quasar } from 'quasar';
import iconSet from 'quasar/icon-set/material-icons';
import { createPinia } from 'pinia';

// Fonts, icons and styles are bundled: nothing is fetched from outside this server.
import '@quasar/extras/material-icons/material-icons.css';
import '@fontsource/roboto/latin-400.css';
import '@fontsource/roboto/latin-500.css';
import '@fontsource/roboto/latin-700.css';
import 'quasar/src/css/index.sass';
import './css/app.scss';

import App from './App.vue';
import { createAppRouter } from './router/index';
import type { BootContext } from './boot/context';
import { install as installNotify } from './boot/notify';
import { install as installApi } from './boot/api';
import { install as installLive } from './boot/live';

// The order is fixed and visible: Quasar → Pinia → router → boot modules → mount.
const app = createApp(App);
app.use(Quasar, { plugins: { Notify, Dialog, Loading }, iconSet });
const pinia = createPinia();
app.use(pinia);
const router = createAppRouter();

const ctx: BootContext = { app, pinia, router };
for (const install of [installNotify, installApi, installLive]) install(ctx);

app.use(router);
void router.isReady().then(() => app.mount('#app'));
