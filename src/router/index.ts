/** The app's router: sign-in and admin guards, and the way back to where the user was going. */
import { createRouter, createWebHistory, type RouteLocationRaw, type RouterHistory } from 'vue-router';

import { notifyError } from '@/boot/notify';
import { useAuthStore } from '@/stores/auth';
import { safeRedirect } from './redirect';
import routes from './routes';

declare module 'vue-router' {
  interface RouteMeta {
    /** Only for signed-in users (inherited by child routes). */
    requiresAuth?: boolean;
    /** Only for administrators. */
    requiresAdmin?: boolean;
    /** Sign-in and sign-up: a signed-in user is sent on to the app. */
    guestOnly?: boolean;
    /** Shown in the browser tab. */
    title?: string;
  }
}

export function createAppRouter(history: RouterHistory = createWebHistory()) {
  const router = createRouter({
    history,
    routes,
    scrollBehavior: () => ({ top: 0 }),
  });

  router.beforeEach(async (to): Promise<RouteLocationRaw | true> => {
    const auth = useAuthStore();
    await auth.ensureChecked();
    if (to.meta.requiresAuth && !auth.signedIn) {
      return { name: 'sign-in', query: to.fullPath === '/' ? {} : { redirect: to.fullPath } };
    }
    if (to.meta.requiresAdmin && !auth.isAdmin) {
      notifyError(new Error('That page is for administrators only.'));
      return { name: 'projects' };
    }
    if (to.meta.guestOnly && auth.signedIn) {
      return safeRedirect(to.query.redirect) ?? { name: 'projects' };
    }
    return true;
  });

  router.afterEach((to) => {
    document.title = to.meta.title ? `${to.meta.title} · Skysieve` : 'Skysieve';
  });

  return router;
}
