export * from './criteria';
export * from './catalog';
export * from './policy';
export * from './evaluate';
export type { MissingInput } from './missing-inputs';
export { MISSING_INPUTS } from './missing-inputs';
export { FIELD_2021 } from './field-2021';
export { FIELD_2011 } from './field-2011';
export { POLICY_CRITERIA } from './policy-criteria';
