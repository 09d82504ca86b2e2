import { createRouter, createWebHistory, type Router } from 'vue-router';
import { Notify } from 'quasar';
import { useSessionStore } from '../stores/session';
import { routes } from './routes';

/** Only same-app paths are followed after sign-in. */
export function safeRedirect(v: unknown): string {
  return typeof v === 'string' && v.startsWith('/') && !v.startsWith('//') ? v : '/';
}

export function createAppRouter(): Router {
  const router = createRouter({ history: createWebHistory(), routes, scrollBehavior: () => ({ top: 0 }) });

  router.beforeEach(async (to) => {
    const session = useSessionStore();
    if (!session.checked) {
      try {
        await session.load();
      } catch {
        // The server is unreachable; the sign-in page explains when the user tries.
      }
    }
    if (to.meta.public) {
      if (to.name === 'sign-in' && session.signedIn) return safeRedirect(to.query.redirect);
      return true;
    }
    if (!session.signedIn) {
      return { name: 'sign-in', query: to.fullPath !== '/' ? { redirect: to.fullPath } : {} };
    }
    const roles = to.matched.flatMap((r) => r.meta.roles ?? []);
    if (roles.length && !session.hasRole(...roles)) {
      Notify.create({ type: 'warning', message: 'Your role cannot open that page.' });
      return { name: 'fleet' };
    }
    if (to.matched.some((r) => r.meta.demoOnly) && !session.me?.demo) {
      Notify.create({ type: 'warning', message: 'That page exists only on a demo install.' });
      return { name: 'fleet' };
    }
    return true;
  });

  router.afterEach((to) => {
    document.title = to.meta.title ? `${to.meta.title} · Runnel` : 'Runnel';
  });
  return router;
}
