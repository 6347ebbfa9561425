// The board's sounds, made with Web Audio (no files to load, nothing from outside). Browsers
// keep audio locked until someone touches the page, so the board shows a button to turn it
// on; a wall screen needs that one touch after it starts.
import { ref, watch } from 'vue';

export type ChimeKind = 'urgent' | 'alert' | 'soft';

const MUTE_KEY = 'plumbline.board.muted';

// Our own patterns: the number of rising notes grows with the urgency.
const PATTERNS: Record<ChimeKind, { notes: number[]; repeat: number }> = {
  urgent: { notes: [659, 831, 988], repeat: 2 },
  alert: { notes: [587, 784], repeat: 1 },
  soft: { notes: [523], repeat: 1 },
};
const NOTE_S = 0.2;
const GAP_S = 0.06;

let context: AudioContext | null = null;
const muted = ref(readMuted());
/** True while the browser keeps audio locked; a click on the board unlocks it. */
const locked = ref(true);
/** Counts the chimes played, for the screen-reader announcement and the tests. */
const played = ref(0);

function readMuted(): boolean {
  try {
    return localStorage.getItem(MUTE_KEY) === '1';
  } catch {
    return false;
  }
}

watch(muted, (value) => {
  try {
    localStorage.setItem(MUTE_KEY, value ? '1' : '0');
  } catch {
    // Private windows may refuse storage; the choice then lasts for this page only.
  }
});

function audio(): AudioContext | null {
  if (typeof window === 'undefined' || !('AudioContext' in window)) return null;
  context ??= new AudioContext();
  locked.value = context.state !== 'running';
  return context;
}

/** Call from a click or key press: the browser then lets the board make sound. */
async function unlock(): Promise<void> {
  const ctx = audio();
  if (!ctx) return;
  if (ctx.state !== 'running') await ctx.resume().catch(() => undefined);
  locked.value = ctx.state !== 'running';
}

function play(kind: ChimeKind): void {
  if (muted.value) return;
  const ctx = audio();
  if (!ctx || ctx.state !== 'running') return;
  const { notes, repeat } = PATTERNS[kind];
  let t = ctx.currentTime + 0.02;
  for (let r = 0; r < repeat; r++) {
    for (const frequency of notes) {
      const osc = ctx.createOscillator();
      const gain = ctx.createGain();
      osc.type = 'triangle';
      osc.frequency.value = frequency;
      // A soft attack and decay: a click-free tone that carries without startling.
      gain.gain.setValueAtTime(0.0001, t);
      gain.gain.exponentialRampToValueAtTime(0.35, t + 0.02);
      gain.gain.exponentialRampToValueAtTime(0.0001, t + NOTE_S);
      osc.connect(gain).connect(ctx.destination);
      osc.start(t);
      osc.stop(t + NOTE_S + 0.02);
      t += NOTE_S + GAP_S;
    }
    t += 0.25;
  }
  played.value++;
}

export function useChime() {
  return { muted, locked, played, play, unlock, toggleMute: () => (muted.value = !muted.value) };
}
