import { defineStore } from 'pinia';
import { computed, ref } from 'vue';
import { ApiError } from '@/api/http';
import { getMe, signInUrl, type MeResponse, type Role } from '@/api/me';
import { forget, keep, kept } from '@/offline/device-store';
import { mayDo, type Action } from '@shared/access';

// When a person holds several roles, the first match decides where "/" takes them: the role
// with the most time-critical work comes first.
const HOME_BY_ROLE: ReadonlyArray<readonly [Role, string]> = [
  ['paramedic', '/pre-alert'],
  ['charge_nurse', '/board'],
  ['trauma_lead', '/review'],
  ['quality', '/quality'],
  ['admin', '/people'],
];

export const useSessionStore = defineStore('session', () => {
  const me = ref<MeResponse | null>(null);
  const loadError = ref<Error | null>(null);
  /** Set when the server could not be reached and the account shown is the one this device last saw. */
  const fromDevice = ref<number | null>(null);
  let pending: Promise<MeResponse> | null = null;

  const user = computed(() => me.value?.user ?? null);
  const roles = computed<Role[]>(() => me.value?.roles ?? []);
  const memberships = computed(() => me.value?.memberships ?? []);
  /** The emergency departments this person belongs to, for the screens that show one at a time. */
  const hospitals = computed(() => memberships.value.filter((m) => m.kind === 'hospital'));
  const homeRoute = computed<string | null>(
    () => HOME_BY_ROLE.find(([role]) => roles.value.includes(role))?.[1] ?? null,
  );

  /** Asks the server who is signed in; with no signal the device's last answer stands in. */
  function fetchMe(): Promise<MeResponse> {
    return getMe()
      .then((answer) => {
        me.value = answer;
        loadError.value = null;
        fromDevice.value = null;
        void keep('me', answer);
        return answer;
      })
      .catch(async (error: unknown) => {
        if (!(error instanceof ApiError) || error.status !== 0) throw error;
        const last = await kept<MeResponse>('me');
        if (!last) throw error;
        me.value = last.value;
        fromDevice.value = last.savedAt;
        return last.value;
      });
  }

  /**
   * Who is signed in, fetched once; concurrent callers share the same request. A device that
   * kept the answer opens at once with it (the installed app on a weak link) and asks the server
   * behind it: a session the server no longer knows goes to sign-in then. The server checks the
   * session on every request and socket either way, so the kept copy opens screens, not data.
   */
  function load(): Promise<MeResponse> {
    if (me.value) return Promise.resolve(me.value);
    pending ??= (async () => {
      const last = await kept<MeResponse>('me');
      if (!last) return fetchMe();
      me.value = last.value;
      fromDevice.value = last.savedAt;
      fetchMe()
        .then(async (fresh) => {
          // Someone else signed in on this device since (a sign-in this app did not start): the
          // screens opened as the kept account start again as the one the server knows.
          if (fresh.user.id === last.value.user.id) return;
          await keep('me', fresh);
          window.location.reload();
        })
        .catch((error: unknown) => {
          if (error instanceof ApiError && error.status === 401) void signInAgain(window.location.pathname + window.location.search);
        });
      return last.value;
    })()
      .catch((error: unknown) => {
        loadError.value = error instanceof Error ? error : new Error(String(error));
        throw error;
      })
      .finally(() => {
        // A failed load must be retryable, so the promise is not kept once settled.
        pending = null;
      });
    return pending;
  }

  /**
   * Off to the identity provider. The kept account is forgotten first: whoever signs in next on
   * this device (the next crew on a shared phone) opens as themselves, never as the last one. What
   * waits in the outbox stays; it belongs to the person who made it and goes when they sign in.
   */
  async function signInAgain(returnTo: string): Promise<void> {
    await forget('me');
    window.location.assign(signInUrl(returnTo));
  }

  /** Whether this person's roles open an action of the access map (the server checks again). */
  function may(action: Action): boolean {
    return mayDo(roles.value, action);
  }

  return { me, user, roles, memberships, hospitals, homeRoute, loadError, fromDevice, load, signInAgain, may };
});
