import { defineStore } from 'pinia';
import { ref, watch } from 'vue';
import * as api from '@/api/cases';
import { connection, getSocket, SocketCommandError } from '@/api/socket';
import { keep, kept } from '@/offline/device-store';
import { OPEN_STATES, type CaseCancel, type CaseRedirect, type CaseSummary, type PreAlertUpdate } from '@shared/schemas/cases';
import type { CaseChange } from '@shared/realtime/events';
import { mergeReload, newerCopy } from './row-version';

/** The crew's open cases: the truth from GET /api/cases, kept live by the agency room's broadcasts. */
export const useCrewCasesStore = defineStore('crew-cases', () => {
  const cases = ref<CaseSummary[]>([]);
  const loaded = ref(false);
  const loadError = ref<string | null>(null);
  /** When the list shown is the device's copy (no signal), the time the server last gave it. */
  const keptAt = ref<number | null>(null);
  /** The last change heard per case, for "updated 03:12 by …" and a risen level. */
  const changes = ref<Record<number, CaseChange>>({});
  /** Cases that left the list (cancelled, closed) while this screen was open, newest first. */
  const ended = ref<CaseSummary[]>([]);

  // A broadcast and a reload can cross; the higher row version is the later truth.
  function upsert(summary: CaseSummary): void {
    const list = cases.value;
    const at = list.findIndex((c) => c.id === summary.id);
    if (at >= 0 && newerCopy(list[at], summary) !== summary) return;
    if (!OPEN_STATES.includes(summary.state)) {
      if (at >= 0) {
        list.splice(at, 1);
        ended.value = [summary, ...ended.value.filter((c) => c.id !== summary.id)].slice(0, 5);
      }
      return;
    }
    if (at >= 0) list.splice(at, 1, summary);
    else list.unshift(summary);
    list.sort((a, b) => b.createdAt - a.createdAt);
  }

  async function load(): Promise<void> {
    try {
      const answer = await api.listCases('open');
      cases.value = [...mergeReload(cases.value, answer.cases).values()].sort((a, b) => b.createdAt - a.createdAt);
      loaded.value = true;
      loadError.value = null;
      keptAt.value = null;
    } catch (err) {
      loadError.value = (err as Error).message;
      if (!loaded.value) await showKept();
    }
  }

  // Every change the server told this screen is the device's copy for the next dead spot.
  watch(cases, (list) => {
    if (loaded.value) void keep('crew-cases', list);
  }, { deep: true });

  /** With no signal, the open cases as this device last saw them, marked with when that was. */
  async function showKept(): Promise<void> {
    const last = await kept<CaseSummary[]>('crew-cases');
    if (!last || loaded.value) return;
    cases.value = last.value;
    keptAt.value = last.savedAt;
  }

  let started = false;
  function start(): void {
    if (started) {
      void load();
      return;
    }
    started = true;
    const socket = getSocket();
    socket.on('case:submitted', (summary) => upsert(summary));
    socket.on('case:updated', (summary, change) => {
      changes.value = { ...changes.value, [summary.id]: change };
      upsert(summary);
    });
    // A fresh (not recovered) connection may have missed broadcasts: read the truth again.
    watch(connection.freshConnections, () => void load());
    void load();
  }

  /** A refusal because the case changed first or has ended carries the case as it stands: shown at once, then rethrown. */
  async function answered<T>(command: Promise<T>): Promise<T> {
    try {
      return await command;
    } catch (err) {
      if (err instanceof SocketCommandError && err.current) upsert(err.current);
      throw err;
    }
  }

  async function update(payload: PreAlertUpdate): Promise<{ summary: CaseSummary; rose: boolean }> {
    const answer = await answered(api.updateCase(payload));
    upsert(answer.summary);
    return answer;
  }
  async function cancel(payload: CaseCancel): Promise<CaseSummary> {
    const { summary } = await answered(api.cancelCase(payload));
    upsert(summary);
    return summary;
  }
  async function redirect(payload: CaseRedirect): Promise<CaseSummary> {
    const { summary } = await answered(api.redirectCase(payload));
    upsert(summary);
    return summary;
  }

  return { cases, loaded, loadError, keptAt, changes, ended, start, load, upsert, update, cancel, redirect };
});
