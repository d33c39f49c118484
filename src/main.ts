import { createApp } from 'vue';
import { createPinia } from 'pinia';
import { Dialog, Notify, Quasar } from 'quasar';

import '@quasar/extras/roboto-font/roboto-font.css';
import '@quasar/extras/material-icons/material-icons.css';
import 'quasar/dist/quasar.css';
import './css/app.css';

import App from './App.vue';
import { api } from './boot/api';
import { applyTheme, preferredTheme } from './boot/theme';
import { createAppRouter } from './router';
import { useAuthStore } from './stores/auth';

const app = createApp(App);
app.use(Quasar, { plugins: { Notify, Dialog } });
applyTheme(preferredTheme());
app.use(createPinia());
const router = createAppRouter();
app.use(router);

// When the server ends the session (expiry, account disabled), go to sign-in and come back afterwards.
api.whenSessionEnds(() => {
  const auth = useAuthStore();
  if (!auth.signedIn) return;
  auth.forget();
  const here = router.currentRoute.value;
  if (here.meta.requiresAuth) void router.push({ name: 'sign-in', query: { redirect: here.fullPath } });
});

app.mount('#app');
