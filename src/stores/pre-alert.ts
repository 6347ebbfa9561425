import { defineStore } from 'pinia';
import { computed, ref, watch } from 'vue';
import { getDestinations, type CrewDestinations } from '@/api/crew';
import { PreAlert } from '@shared/schemas/cases';
import { describeIssues, type FieldIssue } from '@shared/schemas/issues';
import { evaluate, type Evaluation } from '@shared/triage/evaluate';
import { withLocalCriteria } from '@shared/triage/local-criteria';
import { EXAMPLE_POLICY } from '@shared/triage/policy';
import { describePatient, emptyDraft, toClinical, type ClinicalDraft, type HeightUnit } from '@/forms/clinical-draft';
import { overBlank } from '@/forms/over-blank';
import { useOutboxStore } from './outbox';
import { useSessionStore } from './session';
import { keep, kept } from '@/offline/device-store';

interface FormState {
  hospitalId: number | null;
  unitId: number | null;
  eta: string;
  notes: string;
  clinical: ClinicalDraft;
}

// crypto.randomUUID exists only on secure pages; a tablet on a plain-http test network still needs an id.
function newClientId(): string {
  if (typeof crypto.randomUUID === 'function') return crypto.randomUUID();
  const b = crypto.getRandomValues(new Uint8Array(16));
  b[6] = (b[6] & 0x0f) | 0x40;
  b[8] = (b[8] & 0x3f) | 0x80;
  const h = [...b].map((x) => x.toString(16).padStart(2, '0')).join('');
  return `${h.slice(0, 8)}-${h.slice(8, 12)}-${h.slice(12, 16)}-${h.slice(16, 20)}-${h.slice(20)}`;
}

// The destination, unit and height unit last chosen, for each person: the next crew on a shared
// phone does not find the last crew's unit already chosen. No patient data.
const rememberKey = (userId: number | null) => `plumbline.crew.choices.${userId ?? 'nobody'}`;
// The half-typed form is kept on the device (IndexedDB, beside the outbox) as it is typed: it
// comes back after a reload, a crash or the phone closing the app, for the same person only, and
// sign-out wipes it with the rest. A draft older than a long shift is not brought back [ours].
const DRAFT_KEY = 'draft';
const DRAFT_MAX_AGE_MS = 12 * 60 * 60 * 1000;

interface Remembered { hospitalId: number | null; unitId: number | null; heightUnit: HeightUnit | null }
interface KeptDraft { userId: number; form: FormState }

function readJson<T>(storage: Storage, key: string): T | null {
  try {
    const text = storage.getItem(key);
    return text ? (JSON.parse(text) as T) : null;
  } catch {
    return null;
  }
}

export const usePreAlertStore = defineStore('pre-alert', () => {
  const destinations = ref<CrewDestinations | null>(null);
  const loadError = ref<string | null>(null);
  // The screen opens only once the router knows who is signed in.
  const userId = useSessionStore().user?.id ?? null;
  const remembered = ref<Remembered>({ hospitalId: null, unitId: null, heightUnit: null, ...readJson<Remembered>(localStorage, rememberKey(userId)) });
  const form = ref<FormState>(blankForm());
  /** Set once the paramedic pressed Send: from then on every problem shows, not just typed ones. */
  const attempted = ref(false);
  const sendIssues = ref<FieldIssue[]>([]);

  function blankForm(): FormState {
    const r = remembered.value;
    return { hospitalId: r?.hospitalId ?? null, unitId: r?.unitId ?? null, eta: '', notes: '', clinical: emptyDraft(r?.heightUnit ?? 'm') };
  }

  // The kept draft is read as the screen opens. Anything typed before it arrives wins over it,
  // and nothing is written over it until it has been read.
  let draftRead = false;
  let typedBeforeDraft = false;
  const restored = (async () => {
    const last = userId === null ? null : await kept<KeptDraft>(DRAFT_KEY);
    const fresh = last !== null && last.value?.userId === userId && Date.now() - last.savedAt < DRAFT_MAX_AGE_MS;
    if (fresh && !typedBeforeDraft) form.value = overBlank(blankForm(), last.value.form);
    draftRead = true;
    if (typedBeforeDraft) saveDraft();
  })();

  function saveDraft(): void {
    if (userId !== null) void keep<KeptDraft>(DRAFT_KEY, { userId, form: form.value });
  }

  watch(
    form,
    () => {
      if (draftRead) saveDraft();
      else typedBeforeDraft = true;
    },
    { deep: true },
  );
  watch(
    () => [form.value.hospitalId, form.value.unitId, form.value.clinical.heightUnit] as const,
    ([hospitalId, unitId, heightUnit]) => {
      remembered.value = { hospitalId, unitId, heightUnit };
      localStorage.setItem(rememberKey(userId), JSON.stringify(remembered.value));
    },
  );

  /** The destinations from the server, or with no signal the ones this device last had. */
  async function fetchDestinations(): Promise<CrewDestinations> {
    try {
      const answer = await getDestinations();
      void keep('destinations', answer);
      return answer;
    } catch (err) {
      const last = await kept<CrewDestinations>('destinations');
      if (last) return last.value;
      throw err;
    }
  }

  async function load(): Promise<void> {
    try {
      const answer = await fetchDestinations();
      // The choices below are made on the kept draft, once it is back, not under it.
      await restored;
      destinations.value = answer;
      loadError.value = null;
      const f = form.value;
      // A remembered choice that is no longer offered is dropped; a single option is chosen.
      if (!answer.hospitals.some((h) => h.id === f.hospitalId)) f.hospitalId = answer.hospitals.length === 1 ? answer.hospitals[0].id : null;
      if (!answer.units.some((u) => u.id === f.unitId)) f.unitId = answer.units.length === 1 ? answer.units[0].id : null;
      if (remembered.value.heightUnit === null && f.hospitalId !== null && f.clinical.height === '') {
        f.clinical.heightUnit = answer.hospitals.find((h) => h.id === f.hospitalId)!.heightUnit;
      }
    } catch (err) {
      loadError.value = (err as Error).message;
    }
  }

  const hospital = computed(() => destinations.value?.hospitals.find((h) => h.id === form.value.hospitalId) ?? null);
  const built = computed(() => toClinical(form.value.clinical));

  const etaError = computed(() => {
    const text = form.value.eta.trim();
    if (text === '') return null;
    const minutes = Number(text);
    if (!Number.isInteger(minutes)) return 'must be whole minutes';
    if (minutes < 0 || minutes > 600) return 'must be between 0 and 600 minutes';
    return null;
  });

  /** The shared engine in the browser, under the destination's policy in force (the example until one is chosen). */
  const evaluation = computed<Evaluation | null>(() => {
    const input = built.value.input;
    return input ? evaluate(input, { policy: withLocalCriteria(hospital.value?.policy ?? EXAMPLE_POLICY) }) : null;
  });

  function reset(): void {
    const { hospitalId, unitId } = form.value;
    form.value = { ...blankForm(), hospitalId, unitId };
    attempted.value = false;
    sendIssues.value = [];
  }

  /** Checks with the server's own schema, then hands the pre-alert to the outbox. */
  async function send(): Promise<{ clientId: string } | null> {
    attempted.value = true;
    const issues: FieldIssue[] = [];
    if (form.value.hospitalId === null) issues.push({ field: 'Destination ED', message: 'choose where you are taking the patient' });
    if (etaError.value) issues.push({ field: 'ETA', message: etaError.value });
    issues.push(...built.value.issues);
    sendIssues.value = issues;
    const input = built.value.input;
    if (issues.length || !input) return null;
    const candidate = {
      clientId: newClientId(),
      hospitalId: form.value.hospitalId,
      unitId: form.value.unitId,
      etaMinutes: form.value.eta.trim() === '' ? null : Number(form.value.eta),
      notes: form.value.notes.trim() === '' ? undefined : form.value.notes.trim(),
      clinical: input,
    };
    const parsed = PreAlert.safeParse(candidate);
    if (!parsed.success) {
      sendIssues.value = describeIssues(parsed.error);
      return null;
    }
    const unit = destinations.value?.units.find((u) => u.id === parsed.data.unitId)?.callSign;
    const title = [hospital.value?.shortName, unit, describePatient(parsed.data.clinical)].filter(Boolean).join(' · ');
    await useOutboxStore().enqueue(parsed.data, title);
    reset();
    return { clientId: parsed.data.clientId };
  }

  return { destinations, loadError, form, attempted, sendIssues, hospital, built, etaError, evaluation, load, reset, send };
});
