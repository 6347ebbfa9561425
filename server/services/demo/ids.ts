/** The ids of the demo scenario's hospitals, agency, units and people, as the seeders made them. */
export interface DemoIds { hospitals: { general: number; community: number }; agency: number; units: number[]; users: Record<string, number> }
