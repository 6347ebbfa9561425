import { defineStore } from 'pinia';
import { computed, ref } from 'vue';
import * as api from '@/api/quality';
import type { Cell, ActivationBasis, DrilldownRequest, ImportPreview, ImportResult, QualityReport, ReportRequest, WhatIfPolicyChoice, WhatIfResult } from '@shared/schemas/quality';
import type { OutcomeStandard } from '@shared/quality';
import type { LevelId } from '@shared/triage/policy';

import { addMonths, lastDayOf, monthOf, runtimeTimeZone } from '../../shared/days';

/** What a drill-down shows: a heading for the list and the filters that pick its cases. */
export interface DrillTarget {
  title: string;
  cell?: Cell | 'all' | 'no-outcome';
  month?: string;
  agencyId?: number;
  band?: DrilldownRequest['band'];
  criterion?: string;
}

export const useQualityStore = defineStore('quality', () => {
  const now = new Date();
  const hospitalId = ref<number | null>(null);
  // The last twelve months, this one included: the window a monthly report looks back over.
  const toMonth = ref(monthOf(now.getTime(), runtimeTimeZone()));
  const fromMonth = ref(addMonths(toMonth.value, -11));
  const standard = ref<OutcomeStandard>('iss');
  const basis = ref<ActivationBasis>('decided');
  const timeZone = runtimeTimeZone();

  const report = ref<QualityReport | null>(null);
  const loading = ref(false);
  const failure = ref<string | null>(null);

  /** A period that ends before it starts is said plainly, not sent. */
  const periodProblem = computed(() => (fromMonth.value && toMonth.value && toMonth.value < fromMonth.value ? 'The “to” month is before the “from” month.' : null));
  const request = computed<ReportRequest | null>(() =>
    hospitalId.value === null || !fromMonth.value || !toMonth.value || periodProblem.value
      ? null
      : { hospitalId: hospitalId.value, from: `${fromMonth.value}-01`, to: lastDayOf(toMonth.value), standard: standard.value, basis: basis.value, timeZone },
  );
  const csvHref = computed(() => (request.value ? api.reportCsvHref(request.value) : null));

  async function guard<T>(action: () => Promise<T>, onError: (message: string) => void): Promise<T | undefined> {
    try {
      return await action();
    } catch (error) {
      onError(error instanceof Error ? error.message : String(error));
      return undefined;
    }
  }

  async function loadReport(): Promise<void> {
    if (!request.value) return;
    loading.value = true;
    failure.value = null;
    const answer = await guard(() => api.getReport(request.value!), (m) => (failure.value = m));
    if (answer) report.value = answer;
    loading.value = false;
  }

  // ---- Drill-down
  const drill = ref<(DrillTarget & { result: Awaited<ReturnType<typeof api.getDrilldown>> | null }) | null>(null);
  const drillFailure = ref<string | null>(null);
  async function openDrill(target: DrillTarget): Promise<void> {
    if (!request.value) return;
    drill.value = { ...target, result: null };
    drillFailure.value = null;
    const { title: _title, ...filters } = target;
    const result = await guard(() => api.getDrilldown({ ...request.value!, ...filters }), (m) => (drillFailure.value = m));
    if (result && drill.value?.title === target.title) drill.value = { ...target, result };
  }
  const closeDrill = () => (drill.value = null);

  // ---- Import
  const preview = ref<ImportPreview | null>(null);
  const imported = ref<ImportResult | null>(null);
  const importing = ref(false);
  const importFailure = ref<string | null>(null);
  async function checkFile(file: File): Promise<void> {
    if (hospitalId.value === null) return;
    importing.value = true;
    importFailure.value = null;
    imported.value = null;
    preview.value = (await guard(() => api.previewOutcomes(hospitalId.value!, file), (m) => (importFailure.value = m))) ?? null;
    importing.value = false;
  }
  async function confirmImport(): Promise<void> {
    if (!preview.value?.token || hospitalId.value === null) return;
    importing.value = true;
    importFailure.value = null;
    const result = await guard(() => api.importOutcomes(hospitalId.value!, preview.value!.token!), (m) => (importFailure.value = m));
    importing.value = false;
    if (!result) return;
    imported.value = result;
    preview.value = null;
    await loadReport();
  }
  const discardPreview = () => {
    preview.value = null;
    importFailure.value = null;
  };

  // ---- What-if
  const policies = ref<WhatIfPolicyChoice[]>([]);
  const policyChoice = ref<WhatIfPolicyChoice['value'] | null>(null);
  /** The tried policy's answer; it carries the policy in force now over the same cases beside it. */
  const whatIf = ref<WhatIfResult | null>(null);
  const whatIfBusy = ref(false);
  const whatIfFailure = ref<string | null>(null);
  async function loadPolicies(): Promise<void> {
    if (hospitalId.value === null) return;
    const answer = await guard(() => api.listWhatIfPolicies(hospitalId.value!), (m) => (whatIfFailure.value = m));
    policies.value = answer?.policies ?? [];
    // A draft is what people come here to try; otherwise the policy in force.
    policyChoice.value = policies.value.find((p) => p.status === 'draft')?.value ?? policies.value[0]?.value ?? null;
  }
  async function runWhatIf(): Promise<void> {
    if (!request.value || policyChoice.value === null) return;
    whatIfBusy.value = true;
    whatIfFailure.value = null;
    const answer = await guard(() => api.runWhatIf({ ...request.value!, policy: policyChoice.value! }), (m) => (whatIfFailure.value = m));
    whatIf.value = answer ?? null;
    whatIfBusy.value = false;
  }

  function selectHospital(id: number): void {
    hospitalId.value = id;
    report.value = null;
    preview.value = null;
    imported.value = null;
    whatIf.value = null;
    drill.value = null;
  }

  /** A level's name in the hospital's policy in force, as the report gives them; the id until it has loaded. */
  const levelName = (id: LevelId | null | undefined) => (id ? report.value?.levels.find((l) => l.id === id)?.name ?? id : 'Not decided');

  return {
    hospitalId, fromMonth, toMonth, standard, basis, timeZone, request, periodProblem, csvHref,
    report, loading, failure, loadReport, levelName,
    drill, drillFailure, openDrill, closeDrill,
    preview, imported, importing, importFailure, checkFile, confirmImport, discardPreview,
    policies, policyChoice, whatIf, whatIfBusy, whatIfFailure, loadPolicies, runWhatIf,
    selectHospital,
  };
});
