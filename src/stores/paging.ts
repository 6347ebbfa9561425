import { defineStore } from 'pinia';
import { ref, watch } from 'vue';
import * as api from '@/api/paging';
import { connection, getSocket } from '@/api/socket';
import type { PagingStatus } from '@shared/schemas/paging';

// Who answered each paged case on the board, and which messages did not arrive: loaded over REST
// for the board's hospital, then kept live by the server's paging broadcasts.
export const usePagingStore = defineStore('paging', () => {
  const byCase = ref<Record<number, PagingStatus>>({});
  let hospitalId: number | null = null;
  let stop: (() => void) | null = null;

  async function load(): Promise<void> {
    if (hospitalId == null) return;
    const statuses = await api.getBoardPaging(hospitalId);
    byCase.value = Object.fromEntries(statuses.map((s) => [s.caseId, s]));
  }

  function follow(id: number): void {
    if (hospitalId === id && stop) return;
    unfollow();
    hospitalId = id;
    const socket = getSocket();
    const heard = (status: PagingStatus) => (byCase.value = { ...byCase.value, [status.caseId]: status });
    socket.on('paging:changed', heard);
    // A connection that did not recover may have missed broadcasts: load again.
    const stopWatch = watch(connection.freshConnections, () => void load().catch(() => undefined));
    stop = () => {
      socket.off('paging:changed', heard);
      stopWatch();
    };
    void load().catch(() => undefined);
  }

  function unfollow(): void {
    stop?.();
    stop = null;
    hospitalId = null;
    byCase.value = {};
  }

  return { byCase, follow, unfollow, load };
});
