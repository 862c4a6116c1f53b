export { benjaminiHochberg, type MultipleTestingResult } from './benjamini-hochberg.js';
export { benjaminiYekutieli } from './benjamini-yekutieli.js';
