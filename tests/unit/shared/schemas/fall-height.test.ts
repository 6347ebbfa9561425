import { describe, expect, it } from 'vitest';
import { formatFallHeight } from '../../../../shared/schemas/board';

// 1 ft = 0.3048 m exactly (international foot, common practice); 1 storey = 10 ft [source: 2011
// guideline, Sasser 2012]. Each expected text is worked by hand from those two.
describe('a fall height as the board and the page e-mail show it', () => {
  it('shows feet to one decimal, so a fall just under a threshold does not read as the threshold', () => {
    expect(formatFallHeight(6.0, 'ft')).toBe('19.7 ft'); // 6.0 / 0.3048 = 19.685
    expect(formatFallHeight(4, 'ft')).toBe('13.1 ft'); // 4 / 0.3048 = 13.123
    // Exactly 20 ft and 10 ft: the patient's figure keeps its ".0", the criterion's reads "20 ft".
    expect(formatFallHeight(6.096, 'ft')).toBe('20.0 ft');
    expect(formatFallHeight(3.048, 'ft')).toBe('10.0 ft');
  });

  it('shows metres to one decimal and storeys to one decimal, singular for one', () => {
    expect(formatFallHeight(4.26, 'm')).toBe('4.3 m');
    expect(formatFallHeight(9.144, 'storeys')).toBe('3.0 storeys'); // 30 ft
    expect(formatFallHeight(3.048, 'storeys')).toBe('1.0 storey');
    expect(formatFallHeight(4.3, 'storeys')).toBe('1.4 storeys'); // 14.1 ft
  });

  it('says a fall from standing for no height', () => {
    expect(formatFallHeight(0, 'ft')).toBe('from standing');
  });
});
