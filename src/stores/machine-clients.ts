import { defineStore } from 'pinia';
import { ref } from 'vue';
import * as api from '@/api/machine-clients';
import type { IssuedMachineClient, MachineClientView } from '@/api/machine-clients';
import type { RegisterMachineClient } from '@shared/schemas/machine-clients';

export const useMachineClientsStore = defineStore('machine-clients', () => {
  const clients = ref<MachineClientView[]>([]);
  const tokenEndpoint = ref<string | null>(null);
  /** The newest registration's secret: held only until the administrator leaves the page. */
  const issued = ref<IssuedMachineClient | null>(null);

  async function load(): Promise<void> {
    const listing = await api.listMachineClients();
    clients.value = listing.clients;
    tokenEndpoint.value = listing.tokenEndpoint;
  }

  const put = (row: MachineClientView) => {
    const i = clients.value.findIndex((c) => c.id === row.id);
    if (i >= 0) clients.value.splice(i, 1, row);
    else clients.value.unshift(row);
  };

  async function register(request: RegisterMachineClient): Promise<void> {
    issued.value = await api.registerMachineClient(request);
    put(issued.value.client);
  }

  async function revoke(id: number): Promise<void> {
    put(await api.revokeMachineClient(id));
    if (issued.value?.client.id === id) issued.value = null;
  }

  const forgetSecret = () => (issued.value = null);

  return { clients, tokenEndpoint, issued, load, register, revoke, forgetSecret };
});
