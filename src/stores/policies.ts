import { defineStore } from 'pinia';
import { computed, ref } from 'vue';
import * as api from '@/api/policies';
import type { HospitalPolicies, PolicyVersionDetail } from '@/api/policies';
import type { LocalPreviewQuery, SaveDraft } from '@shared/schemas/policies';
import { EXAMPLE_POLICY } from '@shared/triage/policy';
import { withLocalCriteria } from '@shared/triage/local-criteria';

export const usePoliciesStore = defineStore('policies', () => {
  const hospitalId = ref<number | null>(null);
  const listing = ref<HospitalPolicies | null>(null);
  const selected = ref<PolicyVersionDetail | null>(null);
  const loading = ref(false);
  const details = new Map<number, PolicyVersionDetail>();

  const versions = computed(() => listing.value?.versions ?? []);
  const openDraft = computed(() => versions.value.find((v) => v.status === 'draft') ?? null);

  async function load(id: number): Promise<void> {
    hospitalId.value = id;
    loading.value = true;
    try {
      listing.value = await api.listPolicyVersions(id);
      details.clear();
      if (selected.value && selected.value.hospitalId !== id) selected.value = null;
    } finally {
      loading.value = false;
    }
  }

  async function refresh(): Promise<void> {
    if (hospitalId.value !== null) await load(hospitalId.value);
  }

  /** A version's document, fetched once per listing; the example is always at hand. */
  async function documentOf(versionId: number | 'example'): Promise<PolicyVersionDetail['document']> {
    if (versionId === 'example') return EXAMPLE_POLICY;
    let detail = details.get(versionId);
    if (!detail) {
      detail = await api.getPolicyVersion(versionId);
      withLocalCriteria(detail.document);
      details.set(versionId, detail);
    }
    return detail.document;
  }

  async function select(versionId: number): Promise<void> {
    selected.value = details.get(versionId) ?? (await api.getPolicyVersion(versionId));
    withLocalCriteria(selected.value.document);
    details.set(versionId, selected.value);
  }

  async function afterChange(detail: PolicyVersionDetail): Promise<PolicyVersionDetail> {
    withLocalCriteria(detail.document);
    details.set(detail.id, detail);
    selected.value = detail;
    await refresh();
    return detail;
  }

  const startDraft = async (from: 'in-force' | 'example' | number) => afterChange(await api.createDraft({ hospitalId: hospitalId.value!, from }));
  const save = async (id: number, edit: SaveDraft) => afterChange(await api.saveDraft(id, edit));
  const approve = async (id: number, looseningAcknowledged = false) => afterChange(await api.approveVersion(id, { looseningAcknowledged }));
  const previewLocal = (query: LocalPreviewQuery) => api.previewLocalCondition(query);
  const publish = async (id: number, effectiveFrom?: number) => afterChange(await api.publishVersion(id, { effectiveFrom }));
  async function discard(id: number): Promise<void> {
    await api.discardDraft(id);
    if (selected.value?.id === id) selected.value = null;
    await refresh();
  }

  return { hospitalId, listing, versions, openDraft, selected, loading, load, refresh, select, documentOf, startDraft, save, approve, publish, discard, previewLocal };
});
