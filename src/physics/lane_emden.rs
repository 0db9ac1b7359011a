//! The isothermal Lane-Emden equation and the Bonnor-Ebert sphere.
//!
//! With rho = rho_c exp(-psi), r = xi (c_s^2 / (4 pi G rho_c))^(1/2), hydrostatic equilibrium
//! of an isothermal self-gravitating gas reads (Chandrasekhar 1939, chapter IV)
//!
//! psi'' + (2 / xi) psi' = exp(-psi),  psi(0) = psi'(0) = 0.
//!
//! The solution is integrated here by a fixed-step classical fourth-order Runge-Kutta scheme on
//! nodes xi_i = i h, started from the power series
//! psi = xi^2/6 - xi^4/120 + xi^6/1890 - 61 xi^8/1632960 (derived by substituting the series into the equation) for xi <= 0.05,
//! where the neglected xi^10 term is below 1e-17. Values between nodes come from one partial
//! Runge-Kutta step from the node below, so they keep fourth-order accuracy.
//!
//! Dimensionless mass (Bonnor 1956; the standard definition used since):
//!
//! m(xi) = (4 pi)^(-1/2) (rho / rho_c)^(1/2) xi^2 psi'(xi),
//!
//! so that a sphere truncated at xi with boundary pressure P has M = m c_s^4 / (G^(3/2)
//! P^(1/2)). At fixed P and temperature m has its maximum where dm/dxi = 0, which with the
//! equation above becomes exp(-psi) = psi'^2 / 2; that radius is the critical radius
//! xi_crit ~ 6.451 and m_crit ~ 1.182 (Ebert 1955; Bonnor 1956). Written with the outer radius
//! R instead of P, M = xi psi'(xi) R c_s^2 / G, so the critical Bonnor-Ebert mass is
//! M_BE,crit = C R c_s^2 / G with C = xi_crit psi'(xi_crit) ~ 2.4.

/// Largest xi computed by the power series instead of Runge-Kutta steps.
const SERIES_LIMIT: f64 = 0.05;

/// A tabulated solution of the isothermal Lane-Emden equation on [0, xi_max].
#[derive(Debug, Clone)]
pub struct LaneEmden {
    h: f64,
    psi: Vec<f64>,
    dpsi: Vec<f64>,
}

fn series(xi: f64) -> (f64, f64) {
    let x2 = xi * xi;
    let psi =
        x2 * (1.0 / 6.0 + x2 * (-1.0 / 120.0 + x2 * (1.0 / 1890.0 - x2 * 61.0 / 1_632_960.0)));
    let dpsi = xi * (1.0 / 3.0 + x2 * (-1.0 / 30.0 + x2 * (1.0 / 315.0 - x2 * 61.0 / 204_120.0)));
    (psi, dpsi)
}

fn rhs(xi: f64, psi: f64, dpsi: f64) -> (f64, f64) {
    (dpsi, (-psi).exp() - 2.0 * dpsi / xi)
}

fn rk4_step(xi: f64, psi: f64, dpsi: f64, s: f64) -> (f64, f64) {
    let (k1a, k1b) = rhs(xi, psi, dpsi);
    let (k2a, k2b) = rhs(xi + 0.5 * s, psi + 0.5 * s * k1a, dpsi + 0.5 * s * k1b);
    let (k3a, k3b) = rhs(xi + 0.5 * s, psi + 0.5 * s * k2a, dpsi + 0.5 * s * k2b);
    let (k4a, k4b) = rhs(xi + s, psi + s * k3a, dpsi + s * k3b);
    (
        psi + s / 6.0 * (k1a + 2.0 * k2a + 2.0 * k3a + k4a),
        dpsi + s / 6.0 * (k1b + 2.0 * k2b + 2.0 * k3b + k4b),
    )
}

impl LaneEmden {
    /// Integrates the equation from 0 to at least `xi_max` with step `step` (e.g. 1e-3, which
    /// gives about 1e-12 relative accuracy).
    pub fn new(xi_max: f64, step: f64) -> Self {
        assert!(
            step > 0.0 && xi_max > 0.0,
            "Lane-Emden: xi_max and step must be positive"
        );
        let n = (xi_max / step).ceil() as usize + 1;
        let mut psi = Vec::with_capacity(n + 1);
        let mut dpsi = Vec::with_capacity(n + 1);
        for i in 0..=n {
            let xi = i as f64 * step;
            if xi <= SERIES_LIMIT || i == 0 {
                let (p, d) = series(xi);
                psi.push(p);
                dpsi.push(d);
            } else {
                let (p, d) = rk4_step((i - 1) as f64 * step, psi[i - 1], dpsi[i - 1], step);
                psi.push(p);
                dpsi.push(d);
            }
        }
        LaneEmden { h: step, psi, dpsi }
    }

    /// A solution to xi = 20 with step 1e-3, enough for the critical sphere.
    pub fn standard() -> Self {
        Self::new(20.0, 1e-3)
    }

    /// The largest xi covered.
    pub fn xi_max(&self) -> f64 {
        (self.psi.len() - 1) as f64 * self.h
    }

    /// (psi, dpsi/dxi) at `xi` (0 <= xi <= xi_max()).
    pub fn state(&self, xi: f64) -> (f64, f64) {
        assert!(
            (0.0..=self.xi_max()).contains(&xi),
            "Lane-Emden: xi = {xi} outside the tabulated range [0, {}]",
            self.xi_max()
        );
        if xi <= SERIES_LIMIT {
            return series(xi);
        }
        let i = ((xi / self.h).floor() as usize).min(self.psi.len() - 1);
        let x0 = i as f64 * self.h;
        let s = xi - x0;
        if s == 0.0 {
            (self.psi[i], self.dpsi[i])
        } else if x0 <= 0.0 {
            series(xi)
        } else {
            rk4_step(x0, self.psi[i], self.dpsi[i], s)
        }
    }

    /// Density contrast rho / rho_c = exp(-psi(xi)).
    pub fn density_ratio(&self, xi: f64) -> f64 {
        (-self.state(xi).0).exp()
    }

    /// Dimensionless mass m(xi) = (4 pi)^(-1/2) (rho/rho_c)^(1/2) xi^2 psi'(xi) (Bonnor 1956).
    pub fn dimensionless_mass(&self, xi: f64) -> f64 {
        let (psi, dpsi) = self.state(xi);
        (4.0 * std::f64::consts::PI).powf(-0.5) * (-0.5 * psi).exp() * xi * xi * dpsi
    }

    /// The integral of xi^2 exp(-psi) from 0 to xi, which equals xi^2 psi'(xi) by the
    /// equation; the mass of the sphere is 4 pi rho_c r_0^3 times this.
    pub fn mass_integral(&self, xi: f64) -> f64 {
        xi * xi * self.state(xi).1
    }

    /// The critical radius xi_crit, where exp(-psi) = psi'^2 / 2 (maximum of m), found by
    /// bisection to full double precision.
    pub fn xi_crit(&self) -> f64 {
        let g = |xi: f64| {
            let (p, d) = self.state(xi);
            (-p).exp() - 0.5 * d * d
        };
        let n = self.psi.len();
        let mut lo = None;
        for i in 1..n {
            let xi = i as f64 * self.h;
            if g(xi) <= 0.0 {
                lo = Some(((i - 1) as f64 * self.h, xi));
                break;
            }
        }
        let (mut a, mut b) = lo.expect("Lane-Emden table too short to contain xi_crit");
        for _ in 0..200 {
            let m = 0.5 * (a + b);
            if m <= a || m >= b {
                break;
            }
            if g(m) > 0.0 {
                a = m;
            } else {
                b = m;
            }
        }
        0.5 * (a + b)
    }

    /// m_crit = m(xi_crit) ~ 1.182.
    pub fn m_crit(&self) -> f64 {
        self.dimensionless_mass(self.xi_crit())
    }

    /// C = xi_crit psi'(xi_crit) in M_BE,crit = C R c_s^2 / G.
    pub fn critical_mass_coefficient(&self) -> f64 {
        let x = self.xi_crit();
        x * self.state(x).1
    }
}

/// Critical Bonnor-Ebert mass \[kg\] of a sphere of outer radius `radius_m` and isothermal sound
/// speed `cs` [m/s]: M = C R c_s^2 / G with C = xi_crit psi'(xi_crit).
pub fn bonnor_ebert_critical_mass(radius_m: f64, cs: f64) -> f64 {
    LaneEmden::new(7.0, 1e-3).critical_mass_coefficient() * radius_m * cs * cs / super::constants::G
}

/// The column-density profile of a Bonnor-Ebert sphere truncated at `xi_max`, seen in
/// projection: the dimensionless surface density
///
/// sigma(beta) = 2 integral_0^sqrt(xi_max^2 - beta^2) exp(-psi(sqrt(beta^2 + z^2))) dz
///
/// tabulated at impact parameters beta in [0, xi_max] (Simpson's rule along the line of
/// sight, linear interpolation between the tabulated impact parameters).
#[derive(Debug, Clone)]
pub struct BonnorEbertProjection {
    xi_max: f64,
    sigma: Vec<f64>,
    mass_integral: f64,
}

impl BonnorEbertProjection {
    /// Number of tabulated impact parameters.
    const N_BETA: usize = 1024;
    /// Simpson intervals along each line of sight (even).
    const N_Z: usize = 256;

    /// Tabulates the projected profile of a sphere truncated at `xi_max` (0 < xi_max; use
    /// [`LaneEmden::xi_crit`] for the critical sphere).
    pub fn new(xi_max: f64) -> Self {
        assert!(xi_max > 0.0, "Bonnor-Ebert: xi_max must be positive");
        let le = LaneEmden::new(xi_max.max(1.0), 1e-3);
        let xi_top = le.xi_max();
        let sigma = (0..=Self::N_BETA)
            .map(|j| {
                let beta = xi_max * j as f64 / Self::N_BETA as f64;
                let zmax = (xi_max * xi_max - beta * beta).max(0.0).sqrt();
                if zmax == 0.0 {
                    return 0.0;
                }
                let dz = zmax / Self::N_Z as f64;
                let f = |k: usize| {
                    let z = k as f64 * dz;
                    let r = (beta * beta + z * z).sqrt().min(xi_top);
                    le.density_ratio(r)
                };
                let mut s = f(0) + f(Self::N_Z);
                for k in 1..Self::N_Z {
                    s += if k % 2 == 1 { 4.0 * f(k) } else { 2.0 * f(k) };
                }
                2.0 * s * dz / 3.0
            })
            .collect();
        BonnorEbertProjection {
            xi_max,
            sigma,
            mass_integral: le.mass_integral(xi_max),
        }
    }

    /// The projected profile of the critical sphere (xi_max = xi_crit).
    pub fn critical() -> Self {
        Self::new(LaneEmden::new(7.0, 1e-3).xi_crit())
    }

    /// The truncation radius xi_max.
    pub fn xi_max(&self) -> f64 {
        self.xi_max
    }

    /// Dimensionless surface density sigma at impact parameter `beta` (0 beyond xi_max).
    pub fn sigma(&self, beta: f64) -> f64 {
        if !(0.0..self.xi_max).contains(&beta) {
            return 0.0;
        }
        let t = beta / self.xi_max * Self::N_BETA as f64;
        let j = (t.floor() as usize).min(Self::N_BETA - 1);
        let w = t - j as f64;
        self.sigma[j] * (1.0 - w) + self.sigma[j + 1] * w
    }

    /// Mass surface density [kg m^-2] at projected radius `b_m` \[m\] of a sphere of mass
    /// `mass_kg` and outer radius `radius_m`: Sigma(b) = rho_c r_0 sigma(b / r_0), with
    /// r_0 = R / xi_max and rho_c = M / (4 pi r_0^3 xi_max^2 psi'(xi_max)).
    pub fn surface_density(&self, mass_kg: f64, radius_m: f64, b_m: f64) -> f64 {
        let r0 = radius_m / self.xi_max;
        let rho_c = mass_kg / (4.0 * std::f64::consts::PI * r0.powi(3) * self.mass_integral);
        rho_c * r0 * self.sigma(b_m / r0)
    }

    /// Column density N(H2) [m^-2] at projected radius `b_m` (Sigma / (mu_H2 m_H)).
    pub fn column_density(&self, mass_kg: f64, radius_m: f64, b_m: f64) -> f64 {
        self.surface_density(mass_kg, radius_m, b_m) / (super::dust::MU_H2 * super::constants::M_H)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn step_halving_changes_nothing_at_the_1e_11_level() {
        // Self-convergence of the RK4 scheme (fourth order: error ratio ~16 per halving).
        let a = LaneEmden::new(8.0, 2e-3);
        let b = LaneEmden::new(8.0, 1e-3);
        for xi in [0.5, 1.0, 3.0, 6.451, 8.0] {
            let (pa, da) = a.state(xi);
            let (pb, db) = b.state(xi);
            assert!(
                (pa - pb).abs() < 1e-11 && (da - db).abs() < 1e-11,
                "xi {xi}"
            );
        }
    }

    #[test]
    fn mass_integral_equals_quadrature_of_density() {
        // xi^2 psi'(xi) = integral of xi^2 exp(-psi): checks the table against its own equation.
        let le = LaneEmden::standard();
        let n = 4000;
        let x = 5.0;
        let dx = x / n as f64;
        let f = |k: usize| {
            let xi = k as f64 * dx;
            xi * xi * le.density_ratio(xi)
        };
        let mut s = f(0) + f(n);
        for k in 1..n {
            s += if k % 2 == 1 { 4.0 * f(k) } else { 2.0 * f(k) };
        }
        s *= dx / 3.0;
        assert!((s / le.mass_integral(x) - 1.0).abs() < 1e-10);
    }

    #[test]
    fn projected_profile_holds_the_sphere_mass() {
        // 2 pi integral sigma(beta) beta dbeta = 4 pi xi_max^2 psi'(xi_max).
        let le = LaneEmden::standard();
        let xc = le.xi_crit();
        let p = BonnorEbertProjection::new(xc);
        let n = 20_000;
        let db = xc / n as f64;
        let total: f64 = (0..n)
            .map(|k| {
                let b = (k as f64 + 0.5) * db;
                2.0 * std::f64::consts::PI * p.sigma(b) * b * db
            })
            .sum();
        let expect = 4.0 * std::f64::consts::PI * le.mass_integral(xc);
        assert!(
            (total / expect - 1.0).abs() < 2e-4,
            "ratio {}",
            total / expect
        );
    }
}
