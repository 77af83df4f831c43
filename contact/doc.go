// Package contact holds the collision geometry of stickslip and the
// per-step contact problem built on it.
//
// Conventions, stated once for the whole package:
//
//   - Units are SI: metres, kilograms, seconds, newtons, radians.
//   - Quaternions are Hamilton quaternions stored in the order W, X, Y, Z;
//     a unit quaternion q rotates v to q v q*. A Pose maps a local point x
//     to Pos + Rot.Rotate(x) in its parent frame.
//   - Every shape is centred on its local origin. Capsule and cylinder axes
//     lie along local z. A plane is the half-space local z ≤ 0, with outward
//     normal local +z through the local origin.
//   - Collide works in the world frame. Each Point carries a unit Normal
//     pointing from shape A towards shape B: the direction B must move to
//     separate from A. Gap is the signed distance between the two surfaces
//     along Normal: positive when apart, zero when touching, negative when
//     penetrating. Pos is the world point midway between the two surfaces,
//     so the surface of A is at Pos − Gap/2·Normal and that of B at
//     Pos + Gap/2·Normal.
//   - Swapping A and B flips Normal and keeps Gap and Pos.
//   - Feature identifies the pair of features (vertex, edge, face, cap,
//     endpoint) that produced a point. While it stays the same the point's
//     position, normal and gap are smooth functions of the two poses; a
//     change of Feature marks a change of contact mode.
//   - Results are deterministic: the same inputs give bit-identical
//     outputs, in the same order. Collide and BroadPhase.Pairs allocate
//     nothing once the caller's slices have grown.
//
// Mass properties (MassProps) are expressed in the body frame: the centre
// of mass as a body-frame point, the inertia tensor about the centre of
// mass along the body axes.
package contact
