import { defineStore } from 'pinia';
import { computed, reactive, ref } from 'vue';
import * as api from '@/api/review';
import type { AuditChainStatus, CaseTimeline, ComplianceReport, DiscussionItem, ReviewListPage, ReviewListRequest } from '@/api/review';
import type { CaseReviewState, ReviewSortKey } from '@shared/schemas/review';
import { addMonths, dayOf, monthOf, runtimeTimeZone } from '@shared/days';
import type { LevelId } from '@shared/triage/policy';

export interface ReviewFilterState {
  from: string;
  to: string;
  hospitalId: number | null;
  decided: LevelId | 'undecided' | null;
  below: boolean;
  differs: boolean;
  overdue: boolean;
  slowTeam: boolean;
  review: CaseReviewState | null;
}


/** The last three months up to today: what a monthly review meeting looks back over. */
function defaultFilters(): ReviewFilterState {
  const zone = runtimeTimeZone();
  const today = Date.now();
  return { from: `${addMonths(monthOf(today, zone), -2)}-01`, to: dayOf(today, zone), hospitalId: null, decided: null, below: false, differs: false, overdue: false, slowTeam: false, review: null };
}

export const useReviewStore = defineStore('review', () => {
  const timeZone = runtimeTimeZone();
  const filters = reactive<ReviewFilterState>(defaultFilters());
  const sort = ref<ReviewSortKey>('createdAt');
  const dir = ref<'asc' | 'desc'>('desc');
  const page = ref(1);
  const pageSize = ref(25);

  const listing = ref<ReviewListPage | null>(null);
  const discussion = ref<DiscussionItem[]>([]);
  const compliance = ref<ComplianceReport | null>(null);
  const chain = ref<AuditChainStatus | null>(null);
  const timeline = ref<CaseTimeline | null>(null);
  const loading = ref(false);

  const request = computed<ReviewListRequest>(() => ({
    from: filters.from || undefined,
    to: filters.to || undefined,
    timeZone,
    hospitalId: filters.hospitalId ?? undefined,
    decided: filters.decided ?? undefined,
    below: filters.below,
    differs: filters.differs,
    overdue: filters.overdue,
    slowTeam: filters.slowTeam,
    review: filters.review ?? undefined,
    sort: sort.value,
    dir: dir.value,
    page: page.value,
    pageSize: pageSize.value,
  }));
  const csvUrl = computed(() => api.reviewCsvUrl(request.value));

  async function loadCases(): Promise<void> {
    loading.value = true;
    try {
      listing.value = await api.listReviewCases(request.value);
    } finally {
      loading.value = false;
    }
  }

  async function loadDiscussion(): Promise<void> {
    discussion.value = (await api.listDiscussion(filters.hospitalId ?? undefined)).items;
  }

  async function loadCompliance(hospitalId: number | undefined): Promise<void> {
    compliance.value = await api.getCompliance({ hospitalId, from: filters.from || undefined, to: filters.to || undefined, timeZone });
  }

  async function checkChain(): Promise<void> {
    chain.value = await api.checkAuditChain();
  }

  function resetFilters(): void {
    Object.assign(filters, defaultFilters());
    page.value = 1;
  }

  async function openCase(caseId: number): Promise<void> {
    if (timeline.value?.case.id !== caseId) timeline.value = null;
    timeline.value = await api.getCaseTimeline(caseId);
  }

  async function signOff(caseId: number, comment?: string): Promise<void> {
    await api.signOffCase(caseId, comment);
    await openCase(caseId);
  }

  async function flag(caseId: number, comment: string): Promise<void> {
    await api.flagCase(caseId, comment);
    await openCase(caseId);
  }

  async function closeDiscussion(reviewId: number, outcome: string, caseId?: number): Promise<void> {
    await api.closeDiscussion(reviewId, outcome);
    discussion.value = discussion.value.filter((item) => item.review.id !== reviewId);
    if (caseId !== undefined && timeline.value?.case.id === caseId) await openCase(caseId);
  }

  return {
    timeZone, filters, sort, dir, page, pageSize, listing, discussion, compliance, chain, timeline, loading, csvUrl,
    loadCases, loadDiscussion, loadCompliance, checkChain, resetFilters, openCase, signOff, flag, closeDiscussion,
  };
});
