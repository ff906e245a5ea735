//! The Parquet outputs read back with the parquet crate's own row reader (independent of
//! the writer), across thread counts and shard splits.

use crate::projection_support;

use std::fs::File;
use std::path::Path;

use parquet::file::reader::{FileReader, SerializedFileReader};
use parquet::record::Field;
use projection_support::{AGES, FakeCbdSpec, cbd_pair, experience_of, log_rate_pair};
use tailspan::data::config::Compression;
use tailspan::data::{PathsOutput, Sex, Span};
use tailspan::models::{FittedModel, MortalityModel};
use tailspan::projection::engine::ROW_GROUP_ROWS;
use tailspan::projection::period::complete_expectancy;
use tailspan::projection::{
    BootstrapSource, OutputOptions, Projector, Settings, Shard, Uncertainty, scenario_ids,
    write_projection,
};

fn settings(noise: bool, uncertainty: Uncertainty, horizon: usize) -> Settings {
    Settings {
        seed: 77,
        horizon,
        noise,
        uncertainty,
    }
}

fn options(folder: &Path, shard: Option<Shard>, row_group_rows: usize) -> OutputOptions {
    OutputOptions {
        folder: folder.to_path_buf(),
        paths: PathsOutput::All,
        compression: Compression::Zstd,
        shard,
        row_group_rows,
        provenance: tailspan::io::Provenance::new(7, 0, Vec::new()),
    }
}

/// Every row of a Parquet file as (column name, value) pairs, via the record API.
fn rows(path: &Path) -> Vec<Vec<(String, Field)>> {
    let reader = SerializedFileReader::new(File::open(path).unwrap()).unwrap();
    reader
        .get_row_iter(None)
        .unwrap()
        .map(|row| {
            row.unwrap()
                .get_column_iter()
                .map(|(n, f)| (n.clone(), f.clone()))
                .collect()
        })
        .collect()
}

fn in_pool<T: Send>(threads: usize, f: impl FnOnce() -> T + Send) -> T {
    rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .unwrap()
        .install(f)
}

fn sex_index(f: &Field) -> usize {
    match f {
        Field::Str(s) if s == "F" => 0,
        Field::Str(s) if s == "M" => 1,
        other => panic!("unexpected sex {other:?}"),
    }
}

fn int(f: &Field) -> i64 {
    match f {
        Field::UInt(v) => *v as i64,
        Field::Short(v) => *v as i64,
        Field::Int(v) => *v as i64,
        other => panic!("unexpected integer {other:?}"),
    }
}

fn float(f: &Field) -> f64 {
    match f {
        Field::Double(v) => *v,
        other => panic!("unexpected float {other:?}"),
    }
}

#[test]
fn files_hold_exactly_the_in_memory_scenarios() {
    let dir = tempfile::tempdir().unwrap();
    let (n, horizon) = (6, 5);
    for (name, fits) in [
        ("lee-carter", log_rate_pair(120)),
        ("cbd", cbd_pair(AGES, 120)),
    ] {
        let out = dir.path().join(name);
        let mut p =
            Projector::new(fits, settings(true, Uncertainty::Drift, horizon), None).unwrap();
        // Small row groups so that the files hold several.
        let written = write_projection(
            &mut p,
            scenario_ids(n, true),
            &options(&out, None, 1500),
            &|_| {},
        )
        .unwrap();
        let (years, ages) = (p.years(), p.ages());
        assert_eq!(
            ages,
            Span {
                first: 55,
                last: 120
            }
        );
        let paths = rows(&out.join("paths.parquet"));
        assert_eq!(paths.len() as u64, written.path_rows);
        let reader =
            SerializedFileReader::new(File::open(out.join("paths.parquet")).unwrap()).unwrap();
        let metadata = reader
            .metadata()
            .file_metadata()
            .key_value_metadata()
            .unwrap();
        assert!(metadata.iter().any(|kv| {
            kv.key == "tailspan.schema"
                && kv
                    .value
                    .as_deref()
                    .is_some_and(|v| v.contains("central path"))
        }));
        assert_eq!(paths.len(), (n + 1) * 2 * years.len() * ages.len());
        let mut buf = p.buffer();
        let mut row = paths.iter();
        for s in 0..=n as u64 {
            p.generate(s, &mut buf).unwrap();
            for sex in 0..2 {
                for year in years.iter() {
                    for age in ages.iter() {
                        let r = row.next().unwrap();
                        let names: Vec<&str> = r.iter().map(|(c, _)| c.as_str()).collect();
                        let q = buf.q(sex, year, age).unwrap();
                        assert_eq!(int(&r[0].1), s as i64);
                        assert_eq!(sex_index(&r[1].1), sex);
                        assert_eq!(int(&r[2].1), year as i64);
                        assert_eq!(int(&r[3].1), age as i64);
                        // q is the 64-bit rate rounded to the nearest 32-bit float.
                        match &r[4].1 {
                            Field::Float(f) => assert_eq!(f.to_bits(), (q as f32).to_bits()),
                            other => panic!("q = {other:?}"),
                        }
                        assert!(((q as f32) as f64 - q).abs() <= q * 2f64.powi(-24));
                        assert_eq!(names, ["scenario", "sex", "year", "age", "q"]);
                    }
                }
            }
        }
        let factors = rows(&out.join("factors.parquet"));
        let period = rows(&out.join("period.parquet"));
        let (mut f, mut e) = (factors.iter(), period.iter());
        let names = p.basis().model(0).factor_names();
        for s in 0..=n as u64 {
            p.generate(s, &mut buf).unwrap();
            for sex in 0..2 {
                for (h, year) in years.iter().enumerate() {
                    for (j, value) in buf.factors(sex, h + 1).iter().enumerate() {
                        let r = f.next().unwrap();
                        assert_eq!(int(&r[0].1), s as i64);
                        assert_eq!(sex_index(&r[1].1), sex);
                        assert_eq!(int(&r[2].1), year as i64);
                        assert_eq!(r[3].1, Field::Str(names[j].to_string()));
                        assert_eq!(float(&r[4].1).to_bits(), value.to_bits());
                    }
                    let r = e.next().unwrap();
                    assert_eq!(int(&r[2].1), year as i64);
                    let rates = buf.year_rates(sex, year).unwrap();
                    let expected = complete_expectancy(&rates[(65 - ages.first) as usize..]);
                    assert_eq!(float(&r[3].1).to_bits(), expected.to_bits());
                }
            }
        }
        assert!(f.next().is_none() && e.next().is_none());
    }
}

#[test]
fn bytes_do_not_depend_on_thread_count() {
    let dir = tempfile::tempdir().unwrap();
    let mut reference: Option<Vec<Vec<u8>>> = None;
    for threads in [1, 2, 16] {
        let out = dir.path().join(format!("t{threads}"));
        let bytes = in_pool(threads, || {
            let mut p = Projector::new(
                cbd_pair(AGES, 120),
                settings(true, Uncertainty::Drift, 8),
                None,
            )
            .unwrap();
            // About three scenarios per row group: many chunks and several batches.
            write_projection(
                &mut p,
                scenario_ids(40, true),
                &options(&out, None, 3000),
                &|_| {},
            )
            .unwrap();
            ["paths", "factors", "period"]
                .map(|f| std::fs::read(out.join(format!("{f}.parquet"))).unwrap())
                .to_vec()
        });
        match &reference {
            None => reference = Some(bytes),
            Some(r) => assert!(*r == bytes, "{threads} threads wrote different bytes"),
        }
    }
}

#[test]
fn four_shards_hold_the_rows_of_one_run() {
    let dir = tempfile::tempdir().unwrap();
    let run = |shard: Option<Shard>| {
        let mut p = Projector::new(
            log_rate_pair(110),
            settings(true, Uncertainty::Drift, 4),
            None,
        )
        .unwrap();
        write_projection(
            &mut p,
            scenario_ids(21, true),
            &options(dir.path(), shard, ROW_GROUP_ROWS),
            &|_| {},
        )
        .unwrap()
    };
    let whole = run(None);
    assert_eq!(whole.scenarios, 0..22);
    for stem in ["paths", "factors", "period"] {
        let single = rows(&dir.path().join(format!("{stem}.parquet")));
        let mut joined = Vec::new();
        let mut next = 0;
        for k in 1..=4 {
            let shard = Shard { index: k, count: 4 };
            let w = run(Some(shard));
            assert_eq!(w.scenarios.start, next, "shards are contiguous");
            next = w.scenarios.end;
            let name = format!("{stem}.part-{k}-of-4.parquet");
            assert_eq!(w.files.iter().filter(|f| f.ends_with(&name)).count(), 1);
            joined.extend(rows(&dir.path().join(name)));
        }
        assert_eq!(next, 22);
        assert!(
            single == joined,
            "{stem}: shards differ from the single run"
        );
    }
    // More shards than scenarios is refused.
    let shard: Shard = "3/30".parse().unwrap();
    let mut p = Projector::new(
        log_rate_pair(110),
        settings(true, Uncertainty::None, 4),
        None,
    )
    .unwrap();
    assert!(
        write_projection(
            &mut p,
            scenario_ids(21, true),
            &options(dir.path(), Some(shard), 100),
            &|_| {}
        )
        .is_err()
    );
    for bad in ["0/4", "5/4", "1-4", "a/b", "1/0"] {
        assert!(bad.parse::<Shard>().is_err(), "{bad}");
    }
}

#[test]
fn central_only_run_and_skipped_paths() {
    let dir = tempfile::tempdir().unwrap();
    let mut p = Projector::new(
        cbd_pair(AGES, 120),
        settings(false, Uncertainty::Drift, 6),
        None,
    )
    .unwrap();
    let mut opts = options(dir.path(), None, ROW_GROUP_ROWS);
    opts.paths = PathsOutput::None;
    let w = write_projection(&mut p, scenario_ids(500, false), &opts, &|_| {}).unwrap();
    assert_eq!(w.scenarios, 0..1);
    assert_eq!(w.path_rows, 0);
    assert!(!dir.path().join("paths.parquet").exists());
    let factors = rows(&dir.path().join("factors.parquet"));
    assert_eq!(factors.len(), 2 * 6 * 2);
    assert!(factors.iter().all(|r| int(&r[0].1) == 0));
    let mut names: Vec<_> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().into_string().unwrap())
        .collect();
    names.sort();
    assert_eq!(names, ["factors.parquet", "period.parquet"]);
}

#[test]
fn rates_leaving_the_unit_interval_stop_the_run_and_leave_no_files() {
    let dir = tempfile::tempdir().unwrap();
    // A CBD level falling 12 a year underflows q to 0 within the horizon.
    let mut fits = cbd_pair(AGES, 120);
    for (sex, m) in fits.iter_mut() {
        let k = m.factors().clone();
        let steep = nalgebra::DMatrix::from_fn(2, k.ncols(), |i, t| {
            if i == 0 {
                k[(0, t)] - 12.0 * t as f64
            } else {
                k[(1, t)]
            }
        });
        *m = Box::new(projection_support::FakeCbd {
            basis: projection_support::basis(*sex, AGES, projection_support::YEARS, 120),
            kt: steep,
        });
    }
    let mut p = Projector::new(fits, settings(true, Uncertainty::None, 80), None).unwrap();
    let err = write_projection(
        &mut p,
        scenario_ids(3, true),
        &options(dir.path(), None, ROW_GROUP_ROWS),
        &|_| {},
    )
    .unwrap_err()
    .to_string();
    for part in ["scenario 0", "sex F", "year", "age", "not in (0, 1)"] {
        assert!(err.contains(part), "{err}");
    }
    assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0, "{err}");
}

#[test]
fn bootstrap_replicates_are_keyed_and_shared_mod_b() {
    let fits = cbd_pair(AGES, 120);
    let spec = FakeCbdSpec { max_age: 120 };
    let populations: Vec<_> = fits
        .iter()
        .map(|(sex, m)| experience_of(m.as_ref(), *sex, 50_000.0))
        .collect();
    let build = |threads: usize| {
        in_pool(threads, || {
            let source = BootstrapSource {
                models: vec![
                    std::sync::Arc::new(FakeCbdSpec { max_age: 120 }),
                    std::sync::Arc::new(FakeCbdSpec { max_age: 120 }),
                ],
                populations: populations.clone(),
            };
            let fits: Vec<(Sex, Box<dyn FittedModel>)> = populations
                .iter()
                .map(|pop| (pop.sex, spec.fit(pop).unwrap()))
                .collect();
            let mut p = Projector::new(
                fits,
                settings(true, Uncertainty::Bootstrap { samples: 3 }, 5),
                Some(source),
            )
            .unwrap();
            p.prepare(0..8).unwrap();
            p
        })
    };
    let (one, two) = (build(1), build(2));
    let last = |p: &Projector, s: u64| p.basis_of(s).unwrap().last().clone();
    assert_eq!(last(&one, 1), last(&two, 1));
    assert_eq!(
        last(&one, 1),
        last(&one, 4),
        "scenarios 1 and 4 share replicate 1"
    );
    assert_ne!(last(&one, 1), last(&one, 2));
    assert_eq!(last(&one, 0), one.basis().last().clone());
    assert_ne!(
        last(&one, 3),
        last(&one, 0),
        "replicates are refits to resampled deaths"
    );
    // Resampled deaths move the refitted level only by sampling noise.
    assert!((last(&one, 1)[0] - last(&one, 0)[0]).abs() < 0.05);
    let (mut a, mut b) = (one.buffer(), two.buffer());
    for s in 0..8 {
        one.generate(s, &mut a).unwrap();
        two.generate(s, &mut b).unwrap();
        assert_eq!(a.rates(1), b.rates(1));
    }
}

#[test]
fn first_n_paths_hold_the_central_path_and_n_scenarios_in_every_split() {
    // output.paths = 5 keeps scenarios 0..=5 in paths.parquet; the other files keep all.
    let dir = tempfile::tempdir().unwrap();
    let ages_years = 2 * 5 * 56; // 2 sexes × 5 years × ages 55..=110
    let run = |shard: Option<Shard>, threads: usize, folder: &Path| {
        in_pool(threads, || {
            let mut p = Projector::new(
                log_rate_pair(110),
                settings(true, Uncertainty::Drift, 5),
                None,
            )
            .unwrap();
            // Two scenarios a paths row group: the limit falls inside the third chunk.
            let mut opts = options(folder, shard, 2 * ages_years);
            opts.paths = PathsOutput::First(5);
            write_projection(&mut p, scenario_ids(21, true), &opts, &|_| {}).unwrap()
        })
    };
    let single = dir.path().join("single");
    let whole = run(None, 1, &single);
    assert_eq!(whole.path_rows, 6 * ages_years as u64);
    let paths = rows(&single.join("paths.parquet"));
    assert_eq!(paths.len(), 6 * ages_years);
    let ids: std::collections::BTreeSet<i64> = paths.iter().map(|r| int(&r[0].1)).collect();
    assert_eq!(ids, (0..=5).collect());
    let factors = rows(&single.join("factors.parquet"));
    assert_eq!(int(&factors.last().unwrap()[0].1), 21);
    // Same bytes on 3 threads; shards together hold the same rows, a shard past the
    // limit an empty paths part.
    let threaded = dir.path().join("threaded");
    run(None, 3, &threaded);
    for stem in ["paths", "factors", "period"] {
        let name = format!("{stem}.parquet");
        assert!(
            std::fs::read(single.join(&name)).unwrap()
                == std::fs::read(threaded.join(&name)).unwrap(),
            "{stem}: thread counts differ"
        );
    }
    let sharded = dir.path().join("sharded");
    let mut joined = Vec::new();
    for k in 1..=4 {
        let w = run(Some(Shard { index: k, count: 4 }), 2, &sharded);
        let part = rows(&sharded.join(format!("paths.part-{k}-of-4.parquet")));
        assert_eq!(part.len() as u64, w.path_rows);
        // Shards are 0..5, 5..11, 11..16, 16..22: the second holds scenario 5 alone.
        let expected = [5, 1, 0, 0][k - 1] * ages_years;
        assert_eq!(part.len(), expected, "shard {k}");
        joined.extend(part);
    }
    assert!(joined == paths, "shards differ from the single run");
}
