import { createRouter, createWebHistory, START_LOCATION, type RouteRecordRaw } from 'vue-router';
import { ApiError } from '@/api/http';
import type { Role } from '@/api/me';
import { useSessionStore } from '@/stores/session';
import { canOpen, type Action } from '@shared/access';

declare module 'vue-router' {
  interface RouteMeta {
    title: string;
    /** The action of the access map the screen is for; absent means anyone signed in. */
    access?: Action;
    /** Reachable without signing in. */
    public?: boolean;
    /** Set on the screens that belong in the navigation, in the order they appear there. */
    nav?: boolean;
  }
}

/** The product screens, in navigation order; each person sees only those their roles open. */
export const screenRoutes: RouteRecordRaw[] = [
  {
    path: '/pre-alert',
    name: 'new-pre-alert',
    component: () => import('@/views/NewPreAlertView.vue'),
    meta: { title: 'New pre-alert', access: 'pre-alerts.send', nav: true },
  },
  {
    path: '/board',
    name: 'inbound-board',
    component: () => import('@/views/InboundBoardView.vue'),
    // Those who may watch the board open it; only those who may act see its buttons.
    meta: { title: 'Inbound board', access: 'board.read', nav: true },
  },
  {
    path: '/cases/:id(\\d+)/handover',
    name: 'case-handover',
    component: () => import('@/views/HandoverPrintView.vue'),
    meta: { title: 'Handover', access: 'board.read' },
  },
  {
    path: '/review',
    name: 'activation-review',
    component: () => import('@/views/ActivationReviewView.vue'),
    // Readers open it; only those who may write reviews see the review buttons.
    meta: { title: 'Activation review', access: 'review.read', nav: true },
  },
  {
    path: '/review/cases/:id(\\d+)',
    name: 'case-timeline',
    component: () => import('@/views/CaseTimelineView.vue'),
    meta: { title: 'Case timeline', access: 'review.read' },
  },
  {
    path: '/quality',
    name: 'triage-quality',
    component: () => import('@/views/TriageQualityView.vue'),
    meta: { title: 'Triage quality', access: 'quality.read', nav: true },
  },
  {
    path: '/policies',
    name: 'policies',
    component: () => import('@/views/PoliciesView.vue'),
    meta: { title: 'Policies', access: 'policies.read', nav: true },
  },
  {
    path: '/people',
    name: 'people-places',
    component: () => import('@/views/PeoplePlacesView.vue'),
    meta: { title: 'People & places', access: 'people.manage', nav: true },
  },
  {
    path: '/mail',
    name: 'mail-sent',
    component: () => import('@/views/MailSentView.vue'),
    meta: { title: 'Messages sent', access: 'messages.read', nav: true },
  },
];

const routes: RouteRecordRaw[] = [
  {
    path: '/',
    name: 'home',
    component: () => import('@/views/HomeView.vue'),
    meta: { title: 'Home' },
    // The global guard has loaded the session by now; HomeView is only for someone with no role.
    beforeEnter: () => useSessionStore().homeRoute ?? true,
  },
  ...screenRoutes,
  {
    path: '/signed-out',
    name: 'signed-out',
    component: () => import('@/views/SignedOutView.vue'),
    meta: { title: 'Signed out', public: true },
  },
  {
    path: '/:pathMatch(.*)*',
    name: 'not-found',
    component: () => import('@/views/NotFoundView.vue'),
    meta: { title: 'Page not found', public: true },
  },
];

export const router = createRouter({
  history: createWebHistory(import.meta.env.BASE_URL),
  routes,
  // The first screen of a visit opens at the top by itself: asking for it there would only make
  // the browser lay the page out early, in the middle of drawing it.
  scrollBehavior: (_to, from, saved) => saved ?? (from === START_LOCATION ? false : { top: 0 }),
});

router.beforeEach(async (to) => {
  // The screen's code starts loading now, side by side with the session check below, instead
  // of after it: one round trip less on a weak link.
  for (const record of to.matched) {
    for (const component of Object.values(record.components ?? {})) {
      if (typeof component === 'function') void (component as () => Promise<unknown>)().catch(() => undefined);
    }
  }
  if (to.meta.public) return true;
  const session = useSessionStore();
  try {
    await session.load();
  } catch (error) {
    if (error instanceof ApiError && error.status === 401) {
      // Sign-in is a server round trip through the identity provider, not a client route.
      await session.signInAgain(to.fullPath);
      return false;
    }
    // Any other failure is kept in the store and shown by the shell with a way to retry.
  }
  return true;
});

// A screen the person's roles do not open keeps its address and shows ForbiddenView in place
// (see AppShell), so the title says so too.
router.afterEach((to) => {
  const session = useSessionStore();
  const denied = !to.meta.public && session.me !== null && !canOpen(to.meta, session.roles);
  const title = denied ? 'Not open to your roles' : to.meta.title;
  document.title = title ? `${title} · Plumbline` : 'Plumbline';
});
