//! Physical scales against astropy.constants and astropy.units
//! (tests/reference/physical_scales.py: kappa = 4G/(c^2 au), Gould 2000, ApJ 542, 785).

use crate::common;

use causeway::fit::scales::{kappa, scales, PhysicalInput, Scales};

/// Input columns of the reference table, then kappa; the scales follow in the order of
/// `Scales::NAMES`.
const INPUTS: [&str; 8] = [
    "theta_star_uas",
    "rho",
    "tE_days",
    "s",
    "q",
    "dl_kpc",
    "ds_kpc",
    "kappa_mas_per_msun",
];

fn reference() -> causeway::table::Table {
    let columns: Vec<&str> = INPUTS.iter().chain(Scales::NAMES.iter()).copied().collect();
    common::reference("physical_scales.csv", &columns)
}

fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-12 * b.abs()
}

#[test]
fn kappa_matches_astropy_and_gould() {
    let t = reference();
    // astropy.constants (IAU 2015 nominal GM_sun, CODATA c, IAU 2012 au), to round-off.
    assert!(
        close(kappa(), t.rows[0][7]),
        "{} against {}",
        kappa(),
        t.rows[0][7]
    );
    // Gould 2000 quotes 8.144 mas per solar mass.
    assert!((kappa() - 8.144).abs() < 5e-4);
}

#[test]
fn scales_match_astropy() {
    let t = reference();
    assert!(t.rows.len() >= 4);
    for r in &t.rows {
        let input = PhysicalInput {
            theta_star_uas: Some(r[0]),
            dl_kpc: Some(r[5]),
            ds_kpc: Some(r[6]),
            pi_rel_mas: None,
        };
        let sc = scales(&input, r[1], r[2], r[3], r[4]).unwrap();
        for (k, (name, v)) in Scales::NAMES.iter().zip(sc.values()).enumerate() {
            let expected = r[8 + k];
            let v = v.unwrap_or_else(|| panic!("{name} not computed"));
            assert!(close(v, expected), "{name}: {v} against astropy {expected}");
        }
        // The same relative parallax given directly: the same masses, no separation (no D_L).
        let by_parallax = PhysicalInput {
            theta_star_uas: Some(r[0]),
            pi_rel_mas: Some(r[10]),
            ..Default::default()
        };
        let p = scales(&by_parallax, r[1], r[2], r[3], r[4]).unwrap();
        assert!(close(p.total_mass_msun.unwrap(), r[11]));
        assert!(close(p.companion_mass_mjup.unwrap(), r[14]));
        assert_eq!(p.separation_au, None);
    }
}

#[test]
fn unknown_scales_stay_unknown() {
    // No input: nothing. theta_* alone: theta_E and mu_rel only. A point-source model (rho = 0):
    // no theta_E, so no masses either.
    let none = scales(&PhysicalInput::default(), 1e-3, 20.0, 1.0, 1e-3).unwrap();
    assert!(none.values().iter().all(Option::is_none));
    let theta = PhysicalInput {
        theta_star_uas: Some(0.5),
        ..Default::default()
    };
    let sc = scales(&theta, 1e-3, 20.0, 1.0, 1e-3).unwrap();
    assert_eq!(sc.values().iter().filter(|v| v.is_some()).count(), 2);
    let full = PhysicalInput {
        dl_kpc: Some(4.0),
        ds_kpc: Some(8.0),
        ..theta
    };
    let point = scales(&full, 0.0, 20.0, 1.0, 1e-3).unwrap();
    assert_eq!(point.theta_e_mas, None);
    assert_eq!(point.total_mass_msun, None);
    assert_eq!(point.pi_rel_mas, Some(0.125));
}

#[test]
fn bad_input_names_the_parameter() {
    let base = PhysicalInput {
        theta_star_uas: Some(0.6),
        dl_kpc: Some(4.0),
        ds_kpc: Some(8.0),
        pi_rel_mas: None,
    };
    let cases = [
        (
            PhysicalInput {
                dl_kpc: Some(-4.0),
                ..base
            },
            "dl",
        ),
        (
            PhysicalInput {
                ds_kpc: Some(0.0),
                ..base
            },
            "ds",
        ),
        (
            PhysicalInput {
                dl_kpc: Some(8.0),
                ..base
            },
            "dl",
        ),
        (
            PhysicalInput {
                ds_kpc: None,
                ..base
            },
            "dl",
        ),
        (
            PhysicalInput {
                pi_rel_mas: Some(0.1),
                ..base
            },
            "pi_rel",
        ),
        (
            PhysicalInput {
                theta_star_uas: Some(f64::NAN),
                ..base
            },
            "theta_star",
        ),
        (
            PhysicalInput {
                dl_kpc: None,
                ds_kpc: None,
                pi_rel_mas: Some(-0.1),
                ..base
            },
            "pi_rel",
        ),
    ];
    // The source distance alone is valid (the parallax models' D_L): no masses without D_L.
    let alone = PhysicalInput {
        dl_kpc: None,
        ..base
    };
    assert_eq!(
        scales(&alone, 1e-3, 20.0, 1.0, 1e-3)
            .unwrap()
            .total_mass_msun,
        None
    );
    for (input, culprit) in cases {
        let e = scales(&input, 1e-3, 20.0, 1.0, 1e-3).unwrap_err();
        assert_eq!(e.exit_code(), 2, "{input:?}");
        assert!(e.to_string().starts_with(culprit), "{input:?}: {e}");
    }
}
