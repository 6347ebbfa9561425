import { defineStore } from 'pinia';
import { ref } from 'vue';
import * as api from '@/api/bays';
import type { BayView } from '@/api/bays';

/** Each hospital's bays with what is in them, as People & places edits them. */
export const useBaysStore = defineStore('bays', () => {
  const byHospital = ref<Record<number, BayView[]>>({});

  async function load(hospitalId: number): Promise<void> {
    byHospital.value = { ...byHospital.value, [hospitalId]: await api.getBays(hospitalId) };
  }

  async function save(hospitalId: number, names: string[]): Promise<BayView[]> {
    const bays = await api.putBays(hospitalId, names);
    byHospital.value = { ...byHospital.value, [hospitalId]: bays };
    return bays;
  }

  return { byHospital, load, save };
});
