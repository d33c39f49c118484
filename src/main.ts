import { createApp } from 'vue';
import { createPinia } from 'pinia';
import { Dialog, Notify, Quasar } from 'quasar';

import '@quasar/extras/roboto-font/roboto-font.css';
import '@quasar/extras/material-icons/material-icons.css';
import 'quasar/dist/quasar.css';
import './css/app.css';

import App from './App.vue';
import { applyTheme, preferredTheme } from './boot/theme';
import { createAppRouter } from './router';

const app = createApp(App);
app.use(Quasar, { plugins: { Notify, Dialog } });
applyTheme(preferredTheme());
app.use(createPinia());
app.use(createAppRouter());
app.mount('#app');
