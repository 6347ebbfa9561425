// A new version of the app is fetched by the service worker in the background and waits. It is
// announced at once, and applied (one reload) only at a quiet moment: no screen holds it (a
// half-typed pre-alert, a pre-alert waiting in the outbox), no dialog is open, nobody is in a
// field, and either the page is out of sight or nobody has touched it for a minute.
import { ref } from 'vue';
import { useRegisterSW } from 'virtual:pwa-register/vue';

const IDLE_MS = 60_000;
const CHECK_EVERY_MS = 5_000;
/** How often an open app asks the server whether there is a new version. */
const LOOK_FOR_UPDATES_MS = 30 * 60_000;

const holds = new Set<() => boolean>();

/** A screen says when it must not be reloaded under the person; returns the release. */
export function holdUpdatesWhile(busy: () => boolean): () => void {
  holds.add(busy);
  return () => holds.delete(busy);
}

function somethingOpen(): boolean {
  const active = document.activeElement;
  const typing = active instanceof HTMLElement && (active.matches('input, textarea, select') || active.isContentEditable);
  return typing || document.querySelector('[role="dialog"], [role="alertdialog"]') !== null;
}

/** Whether applying an update now would interrupt nobody. */
export function isQuietMoment(lastTouchAt: number, now = Date.now()): boolean {
  if ([...holds].some((busy) => busy())) return false;
  if (somethingOpen()) return false;
  return document.visibilityState === 'hidden' || now - lastTouchAt >= IDLE_MS;
}

export function useAppUpdate() {
  const applying = ref(false);
  let lastTouchAt = Date.now();
  let checker: ReturnType<typeof setInterval> | undefined;

  const { needRefresh, updateServiceWorker } = useRegisterSW({
    immediate: true,
    onRegisteredSW(_url, registration) {
      if (!registration) return;
      setInterval(() => void registration.update().catch(() => undefined), LOOK_FOR_UPDATES_MS);
      window.addEventListener('online', () => void registration.update().catch(() => undefined));
    },
    onNeedRefresh() {
      for (const event of ['pointerdown', 'keydown', 'input'] as const) {
        window.addEventListener(event, () => (lastTouchAt = Date.now()), { capture: true, passive: true });
      }
      const tryNow = () => {
        if (!applying.value && isQuietMoment(lastTouchAt)) void apply();
      };
      checker ??= setInterval(tryNow, CHECK_EVERY_MS);
      document.addEventListener('visibilitychange', tryNow);
    },
  });

  /** Lets the waiting version take over; the page reloads once it has. */
  async function apply(): Promise<void> {
    applying.value = true;
    clearInterval(checker);
    await updateServiceWorker(true);
  }

  /** The person asked for it; still not while a screen holds it. */
  function applyNow(): boolean {
    if ([...holds].some((busy) => busy())) return false;
    void apply();
    return true;
  }

  return { needRefresh, applying, applyNow };
}
