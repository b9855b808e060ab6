//! Three-vectors as `[f32; 3]` (x forward along the handle, y to the left, z up).

/// A 3-vector.
pub type V3 = [f32; 3];

/// a·b
pub fn dot(a: V3, b: V3) -> f32 {
    a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
}
/// a×b
pub fn cross(a: V3, b: V3) -> V3 {
    [a[1] * b[2] - a[2] * b[1], a[2] * b[0] - a[0] * b[2], a[0] * b[1] - a[1] * b[0]]
}
/// a + b
pub fn add(a: V3, b: V3) -> V3 {
    [a[0] + b[0], a[1] + b[1], a[2] + b[2]]
}
/// a − b
pub fn sub(a: V3, b: V3) -> V3 {
    [a[0] - b[0], a[1] - b[1], a[2] - b[2]]
}
/// k·a
pub fn scale(a: V3, k: f32) -> V3 {
    [a[0] * k, a[1] * k, a[2] * k]
}
/// |a|
pub fn norm(a: V3) -> f32 {
    libm::sqrtf(dot(a, a))
}
/// a/|a| (zero stays zero).
pub fn unit(a: V3) -> V3 {
    let n = norm(a);
    if n > 0.0 && n.is_finite() {
        scale(a, 1.0 / n)
    } else {
        [0.0; 3]
    }
}
/// Unit vector of an axis with yaw ψ (from x towards y) and pitch α (up from horizontal), radians.
pub fn from_yaw_pitch(yaw_rad: f32, pitch_rad: f32) -> V3 {
    let (sy, cy) = crate::trigf::sin_cos(yaw_rad);
    let (sp, cp) = crate::trigf::sin_cos(pitch_rad);
    [cp * cy, cp * sy, sp]
}
