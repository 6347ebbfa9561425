import type { Router } from 'express';
import type { AppDeps } from '../deps';
import { healthRouter } from './health';
import { meRouter } from './me';
import { mailRouter } from './mail';
import { casesRouter } from './cases';
import { policiesRouter } from './policies';
import { peopleRouter } from './people';
import { boardRouter } from './board';
import { reviewRouter } from './review';
import { crewRouter } from './crew';
import { qualityRouter } from './quality';
import { pagingRouter } from './paging';
import { auditRouter } from './audit';
import { exchangeRouter } from './exchange';
import { machineClientsRouter } from './machine-clients';
import { openApiRouter } from './openapi';
import { baysRouter } from './bays';

/** Every API router, in mounting order. A new resource adds its router here. */
export const apiRouters: Array<(deps: AppDeps) => Router> = [healthRouter, meRouter, mailRouter, casesRouter, policiesRouter, peopleRouter, reviewRouter, crewRouter, boardRouter, qualityRouter, pagingRouter, auditRouter, exchangeRouter, machineClientsRouter, baysRouter, openApiRouter];
