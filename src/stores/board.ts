import { defineStore } from 'pinia';
import { useDocumentVisibility, useIntervalFn } from '@vueuse/core';
import { computed, ref, watch, type WatchStopHandle } from 'vue';
import * as api from '@/api/board';
import { ApiError } from '@/api/http';
import { connection, getSocket } from '@/api/socket';
import type { BoardAction, BoardActionBody, BoardActionFields, BoardLevel, BoardSnapshot } from '@shared/schemas/board';
import { OPEN_STATES, type CaseSummary } from '@shared/schemas/cases';
import type { CaseChange } from '@shared/realtime/events';
import type { LevelId } from '@shared/triage/policy';
import { byUrgency, urgencyGroup } from '@shared/board/urgency';
import { newerCopy } from './row-version';

// The board trusts the server, never its own memory: a snapshot over REST first, live events
// after, and the snapshot again every minute. After a connection that did not recover its state,
// and when the tab comes back into view, it asks only for what changed since its last snapshot
// (with the ids of every open case, so it drops the rest); when the server cannot say, or a case
// it lists is not on the board, the whole snapshot. A case's rowVersion orders what arrives, so an
// older copy never overwrites a newer one.

/** Something the board should say out loud (a sound and an announcement). */
export interface BoardAlert { kind: 'new' | 'rose'; caseId: number; caseNumber: string; level: LevelId; levelName: string; seq: number }
/** A case that left the board, said once so nobody wonders where it went. */
export interface BoardNotice { id: number; text: string }

const OPEN: ReadonlySet<string> = new Set(OPEN_STATES);
const RELOAD_EVERY_MS = 60_000;

export const needsAcknowledgement = (c: CaseSummary) => c.acknowledgedAt == null || c.levelRose;

export const useBoardStore = defineStore('board', () => {
  const hospital = ref<BoardSnapshot['hospital'] | null>(null);
  const levels = ref<BoardLevel[]>([]);
  const byId = ref<Record<number, CaseSummary>>({});
  const loading = ref(false);
  const loadError = ref<string | null>(null);
  const syncedAt = ref<number | null>(null);
  /** Where the last snapshot stood in the server's record of changes. */
  let cursor: string | null = null;
  /** Server time minus this device's time, so countdowns read true on a wall screen with a wrong clock. */
  const clockOffset = ref(0);
  const now = ref(Date.now());
  const busy = ref<Record<number, BoardAction | null>>({});
  const alert = ref<BoardAlert | null>(null);
  const notices = ref<BoardNotice[]>([]);

  /** How many cases the server holds open; more than the board has when its list was cut at the cap. */
  const openTotal = ref(0);
  const cases = computed(() => Object.values(byId.value));
  // The shared urgency order, as the server's lists use it: waiting first (overdue on top), then
  // by level, then by ETA; cases long past their ETA apart, arrived patients last.
  const ordered = computed(() => byUrgency(cases.value, now.value));
  const onTheWay = computed(() => ordered.value.filter((c) => ['waiting', 'open'].includes(urgencyGroup(c, now.value))));
  const pastEta = computed(() => ordered.value.filter((c) => urgencyGroup(c, now.value) === 'stale'));
  const inDepartment = computed(() => ordered.value.filter((c) => urgencyGroup(c, now.value) === 'arrived'));
  const notShown = computed(() => Math.max(0, openTotal.value - cases.value.length));
  const waiting = computed(() => cases.value.filter(needsAcknowledgement));

  const ticking = useIntervalFn(() => (now.value = Date.now() + clockOffset.value), 1000, { immediate: false });
  const reloading = useIntervalFn(() => void load(), RELOAD_EVERY_MS, { immediate: false });
  const visibility = useDocumentVisibility();

  let generation = 0;
  let touchedDuringLoad = new Set<number>();
  let stops: Array<() => void> = [];
  let seq = 0;
  let noticeSeq = 0;

  function nameOf(level: LevelId): string {
    return levels.value.find((l) => l.id === level)?.name ?? level;
  }

  function say(text: string) {
    notices.value = [{ id: ++noticeSeq, text }, ...notices.value].slice(0, 4);
  }

  /** Applies one copy of a case; returns false when it was older than what the board holds. */
  function upsert(summary: CaseSummary, why?: string): boolean {
    const held = byId.value[summary.id];
    if (newerCopy(held, summary) !== summary) return false;
    touchedDuringLoad.add(summary.id);
    if (!hospital.value || summary.hospital.id !== hospital.value.id || !OPEN.has(summary.state)) {
      if (held) {
        const next = { ...byId.value };
        delete next[summary.id];
        byId.value = next;
        const what = summary.state === 'cancelled' ? `cancelled by the crew${summary.cancelReason ? `: ${summary.cancelReason}` : ''}` : summary.state === 'closed' ? 'closed' : why ?? 'sent elsewhere';
        say(`Case ${summary.caseNumber} left the board: ${what}.`);
      }
      return true;
    }
    byId.value = { ...byId.value, [summary.id]: summary };
    return true;
  }

  function remove(id: number, text: string) {
    if (!byId.value[id]) return;
    const next = { ...byId.value };
    delete next[id];
    byId.value = next;
    touchedDuringLoad.add(id);
    say(text);
  }

  /**
   * The ED asked for last (the address, the switcher) or shown. A reload without one (a fresh
   * socket, the tab shown again, the timer) asks for this ED, so one that starts before the first
   * answer has come back cannot turn the board to the person's first ED instead.
   */
  let askedFor: number | undefined;

  /** Reloads the board; `changes` asks only for what changed since the last snapshot of the same hospital. */
  async function load(hospitalId?: number, opts: { changes?: boolean } = {}): Promise<void> {
    const mine = ++generation;
    touchedDuringLoad = new Set();
    loading.value = true;
    if (hospitalId !== undefined) askedFor = hospitalId;
    try {
      const wanted = askedFor ?? hospital.value?.id;
      const since = opts.changes && cursor && wanted === hospital.value?.id ? cursor : undefined;
      const snapshot = await api.getBoard(wanted, since);
      if (mine !== generation) return;
      const switched = hospital.value?.id !== snapshot.hospital.id;
      const next: Record<number, CaseSummary> = {};
      if (snapshot.changesSince !== undefined && snapshot.openIds && !switched) {
        const open = new Set(snapshot.openIds);
        for (const held of Object.values(byId.value)) if (open.has(held.id)) next[held.id] = held;
        for (const c of snapshot.cases) next[c.id] = newerCopy(next[c.id], c);
        // A case open on the server that is neither held nor among the changes: the board lost
        // track somewhere. The whole snapshot puts it right.
        if (snapshot.openIds.some((id) => !next[id] && !touchedDuringLoad.has(id))) return await load(snapshot.hospital.id);
      } else {
        for (const c of snapshot.cases) next[c.id] = newerCopy(switched ? undefined : byId.value[c.id], c);
      }
      hospital.value = snapshot.hospital;
      askedFor = snapshot.hospital.id;
      levels.value = snapshot.levels;
      openTotal.value = snapshot.openTotal ?? snapshot.cases.length;
      clockOffset.value = snapshot.at - Date.now();
      cursor = snapshot.cursor;
      // A case announced while the snapshot was on its way is newer than the snapshot.
      for (const id of touchedDuringLoad) {
        const held = byId.value[id];
        if (held && !next[id] && OPEN.has(held.state) && !switched) next[id] = held;
      }
      byId.value = next;
      syncedAt.value = Date.now();
      loadError.value = null;
    } catch (error) {
      if (mine === generation) loadError.value = error instanceof Error ? error.message : String(error);
    } finally {
      if (mine === generation) loading.value = false;
    }
  }

  function raise(kind: BoardAlert['kind'], summary: CaseSummary) {
    alert.value = { kind, caseId: summary.id, caseNumber: summary.caseNumber, level: summary.recommendedLevel, levelName: summary.latest.result.activationName, seq: ++seq };
  }

  /** Connects the board to the socket and keeps it true; returns when the first snapshot is in. */
  async function start(hospitalId?: number): Promise<void> {
    stop();
    const socket = getSocket();
    const onSubmitted = (summary: CaseSummary) => {
      if (upsert(summary) && summary.hospital.id === hospital.value?.id) raise('new', summary);
    };
    const onUpdated = (summary: CaseSummary, change: CaseChange) => {
      const known = Boolean(byId.value[summary.id]);
      if (!upsert(summary)) return;
      if (summary.hospital.id !== hospital.value?.id) return;
      if (change.rose) raise('rose', summary);
      else if (!known && OPEN.has(summary.state)) raise('new', summary);
    };
    const onRemoved = (info: { id: number; caseNumber: string; reason: string }) => remove(info.id, `Case ${info.caseNumber} left the board: ${info.reason}`);
    socket.on('case:submitted', onSubmitted);
    socket.on('case:updated', onUpdated);
    socket.on('case:removed', onRemoved);
    stops.push(() => {
      socket.off('case:submitted', onSubmitted);
      socket.off('case:updated', onUpdated);
      socket.off('case:removed', onRemoved);
    });
    const stopFresh: WatchStopHandle = watch(connection.freshConnections, () => void load(undefined, { changes: true }));
    stops.push(stopFresh);
    ticking.resume();
    reloading.resume();
    // Back in view: what changed while it was hidden.
    const stopVisible = watch(visibility, (state) => {
      if (state === 'visible') void load(undefined, { changes: true });
    });
    stops.push(ticking.pause, reloading.pause, stopVisible);
    await load(hospitalId);
    now.value = Date.now() + clockOffset.value;
  }

  function stop() {
    for (const s of stops) s();
    stops = [];
  }

  /**
   * One action. A refusal because someone else acted first (409) or the page failed (502)
   * carries the case's truth, so this board agrees with the winner's, then rethrows for the card.
   */
  async function act<A extends BoardAction>(caseId: number, action: A, body: BoardActionFields<A>): Promise<CaseSummary> {
    const held = byId.value[caseId];
    if (!held) throw new Error('That case is no longer on the board.');
    busy.value = { ...busy.value, [caseId]: action };
    try {
      const { case: summary } = await api.actOnCase(caseId, action, { ...body, rowVersion: held.rowVersion } as BoardActionBody[A]);
      upsert(summary);
      return summary;
    } catch (error) {
      if (error instanceof ApiError && (error.status === 409 || error.status === 502)) {
        const current = api.refusedCase(error, caseId);
        // An answer without the case (a proxy's error page) still leads to the truth, one read away.
        if (current) upsert(current);
        else await api.getCaseSummary(caseId).then((fresh) => upsert(fresh)).catch(() => load());
      }
      throw error;
    } finally {
      busy.value = { ...busy.value, [caseId]: null };
    }
  }

  function dismissNotice(id: number) {
    notices.value = notices.value.filter((n) => n.id !== id);
  }

  return {
    hospital, levels, byId, cases, ordered, onTheWay, pastEta, inDepartment, notShown, openTotal, waiting, loading, loadError, syncedAt, clockOffset, now, busy, alert, notices,
    nameOf, load, start, stop, act, upsert, dismissNotice,
  };
});
