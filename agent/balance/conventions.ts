/**
 * Vector conventions of the balancing workbench, and how weight angle and phase lag combine.
 *
 * READINGS. A reading is the 1x vector of one sensor: amplitude (in the job's one unit) and phase,
 * always a LAG in degrees: the rotation from the tach edge (reference mark passing the pickup) to
 * the positive peak of the 1x signal. Internally a reading is the complex number
 * amp * e^(+i*phase).
 *
 * WEIGHTS. A weight is a mass (g) at an angle (deg) on the rotor, measured from the reference mark
 * either AGAINST rotation (`against_rotation`, the default) or WITH rotation (`with_rotation`).
 *
 * HOW THEY COMBINE (why the convention decides which side the weight lands on). Take a weight
 * theta degrees from the mark measured against rotation: it trails the mark, so it passes every
 * fixed point of the machine theta degrees of rotation AFTER the mark does. The rotating force it
 * makes is therefore the force of the same weight on the mark, delayed by theta; a linear machine
 * answers with the same response delayed by theta, i.e. with theta MORE phase lag. So, with both
 * angles counted as positive numbers:
 *
 *   against_rotation:  moving a weight +theta moves its 1x vector +theta (more lag).
 *                      vibration = H * m * e^(+i*theta)
 *   with_rotation:     a weight beta degrees WITH rotation leads the mark, so its 1x vector has
 *                      beta LESS lag.   vibration = H * m * e^(-i*beta)
 *
 * where H is the 1x vector a 1 g weight ON the reference mark adds (angle 0 is the same point in
 * both conventions, so H itself does not depend on the convention). The solver therefore works in
 * one internal frame, the against-rotation frame, and converts every weight angle on the way in and
 * every result angle on the way out: internal = +angle (against) or -angle (with). Read the wrong
 * way, a correction at 60 degrees would be put at 300 degrees: mirrored, on the wrong side.
 *
 * Consequence people can check by eye: in the against-rotation convention the heavy spot sits
 * (phase - machine lag) from the mark and the correction 180 degrees from it; in the with-rotation
 * convention every one of those angles changes sign.
 */
import { wrapDeg } from './complex.js';

export type AngleConvention = 'against_rotation' | 'with_rotation';

export const ANGLE_CONVENTIONS: readonly AngleConvention[] = ['against_rotation', 'with_rotation'];

/** A weight angle in the job's convention -> the internal (against-rotation) angle. */
export function toInternalDeg(angleDeg: number, convention: AngleConvention): number {
  return wrapDeg(convention === 'against_rotation' ? angleDeg : -angleDeg);
}

/** An internal (against-rotation) angle -> the job's convention. The mapping is its own inverse. */
export function fromInternalDeg(angleDeg: number, convention: AngleConvention): number {
  return toInternalDeg(angleDeg, convention);
}

/** One line stating the convention, printed with every table and carried in every JSON result. */
export function conventionText(convention: AngleConvention): string {
  const dir = convention === 'against_rotation' ? 'AGAINST' : 'WITH';
  return (
    `weight angles in degrees from the reference mark, measured ${dir} rotation; ` +
    `phase is the lag in degrees from the tach edge to the 1x peak`
  );
}
