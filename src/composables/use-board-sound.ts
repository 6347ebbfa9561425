import { computed, onMounted, onUnmounted, ref, watch, type Ref } from 'vue';
import type { CaseSummary } from '@shared/schemas/cases';
import { LEVEL_RANK, type LevelId } from '@shared/triage/policy';
import type { BoardAlert } from '@/stores/board';
import { useChime, type ChimeKind } from './use-chime';

/**
 * The board's sound: a chime for each new or risen case (and a spoken announcement for screen
 * readers), a reminder once a minute while a case waits for acknowledgement, and the one tap a
 * browser needs before it plays sound.
 */
export function useBoardSound(alert: Readonly<Ref<BoardAlert | null>>, waiting: Readonly<Ref<readonly CaseSummary[]>>, canAct: Readonly<Ref<boolean>>) {
  const { muted, locked, played, play, unlock, toggleMute } = useChime();
  const announcement = ref('');

  const chimeFor = (level: LevelId, rose: boolean): ChimeKind => (rose || level === 'full' ? 'urgent' : level === 'limited' ? 'alert' : 'soft');

  watch(alert, (a) => {
    if (!a) return;
    play(chimeFor(a.level, a.kind === 'rose'));
    announcement.value = a.kind === 'rose' ? `Level rose on case ${a.caseNumber}: ${a.levelName} now recommended.` : `New pre-alert, case ${a.caseNumber}: ${a.levelName} recommended.`;
  });

  // While anything waits for an acknowledgement, remind once a minute [ours].
  let reminder: number | undefined;
  function remind() {
    if (!canAct.value || !waiting.value.length) return;
    const top = [...waiting.value].sort((a, b) => LEVEL_RANK[b.recommendedLevel] - LEVEL_RANK[a.recommendedLevel])[0];
    play(chimeFor(top.recommendedLevel, top.levelRose));
  }

  const onGesture = (event: Event) => {
    // The sound button decides for itself; unlocking first would make its click read as "mute".
    if ((event.target as Element | null)?.closest?.('.sound-toggle')) return;
    if (!muted.value && locked.value) void unlock();
  };

  onMounted(() => {
    document.addEventListener('pointerdown', onGesture);
    document.addEventListener('keydown', onGesture);
    reminder = window.setInterval(remind, 60_000);
  });
  onUnmounted(() => {
    document.removeEventListener('pointerdown', onGesture);
    document.removeEventListener('keydown', onGesture);
    window.clearInterval(reminder);
  });

  const soundLabel = computed(() => (muted.value ? 'Sound off: turn on' : locked.value ? 'Turn sound on' : 'Mute sound'));
  function onSoundButton() {
    if (muted.value) {
      toggleMute();
      void unlock().then(() => play('soft'));
    } else if (locked.value) {
      void unlock().then(() => play('soft'));
    } else {
      toggleMute();
    }
  }

  return { muted, locked, played, unlock, announcement, soundLabel, onSoundButton };
}
