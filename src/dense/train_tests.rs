//! Unit tests of `train`: the loss falls, results repeat for a seed whatever the thread
//! count, saved encoders give the same vectors, and bad data is a typed error.

use super::*;
use crate::dense::synthetic::ring_and_scheduler_task;
use crate::dense::Encoder;

fn config() -> TrainConfig {
    TrainConfig {
        encoder: EncoderSettings {
            buckets: 1 << 12,
            dim: 32,
            seed: 3,
        },
        epochs: 6,
        batch_size: 32,
        ..TrainConfig::default()
    }
}

fn in_pool<T: Send>(threads: usize, f: impl FnOnce() -> T + Send) -> T {
    match rayon::ThreadPoolBuilder::new().num_threads(threads).build() {
        Ok(pool) => pool.install(f),
        Err(e) => panic!("cannot build a rayon pool of {threads} threads: {e}"),
    }
}

#[test]
fn training_lowers_the_loss_and_raises_recall() {
    let (data, validation) = ring_and_scheduler_task(17, 200, 300, 60);
    let (_, report) = train(&data, &config(), Some(&validation)).expect("valid data");
    let first = report
        .epochs
        .first()
        .map(|e| e.mean_loss)
        .unwrap_or(f64::NAN);
    let last = report
        .epochs
        .last()
        .map(|e| e.mean_loss)
        .unwrap_or(f64::NAN);
    assert!(last < 0.8 * first, "loss {first} -> {last}");
    let before = report.initial_validation_recall.unwrap_or(1.0);
    let after = report
        .epochs
        .last()
        .and_then(|e| e.validation_recall)
        .unwrap_or(0.0);
    assert!(after > before, "held-out recall@10 {before} -> {after}");
}

#[test]
fn same_seed_same_bytes_whatever_the_thread_count() {
    let (data, _) = ring_and_scheduler_task(5, 80, 120, 0);
    let mut negatives = Vec::new();
    for (i, _) in data.pairs.iter().enumerate() {
        negatives.push(vec![(i % 80) as u32, ((i * 7) % 80) as u32]);
    }
    let data = TrainingData {
        hard_negatives: negatives,
        ..data
    };
    let cfg = TrainConfig {
        epochs: 2,
        ..config()
    };
    let run = |threads| {
        in_pool(threads, || {
            let (enc, report) = train(&data, &cfg, None).expect("valid data");
            let losses: Vec<u64> = report
                .epochs
                .iter()
                .map(|e| e.mean_loss.to_bits())
                .collect();
            (enc.to_bytes(), losses)
        })
    };
    let one = run(1);
    let two = run(2);
    let three = run(3);
    assert_eq!(one, two);
    assert_eq!(one, three);
    let other_seed = in_pool(2, || {
        train(&data, &TrainConfig { seed: 99, ..cfg }, None)
            .map(|(e, _)| e.to_bytes())
            .expect("valid data")
    });
    assert_ne!(one.0, other_seed);
}

#[test]
fn trained_encoder_survives_a_round_trip() {
    let (data, _) = ring_and_scheduler_task(8, 60, 80, 0);
    let (enc, _) = train(
        &data,
        &TrainConfig {
            epochs: 1,
            ..config()
        },
        None,
    )
    .expect("valid data");
    let back = LearnedEncoder::from_bytes(&enc.to_bytes()).expect("own bytes");
    for g in data.goals.iter().take(10) {
        let refs = crate::dense::token_refs(g);
        assert_eq!(back.encode_goal(&refs), enc.encode_goal(&refs));
    }
    for p in data.premises.iter().take(10) {
        let refs = crate::dense::token_refs(p);
        assert_eq!(back.encode_premise(&refs), enc.encode_premise(&refs));
    }
}

#[test]
fn bad_data_and_settings_are_typed_errors() {
    let (data, _) = ring_and_scheduler_task(2, 10, 5, 0);
    let out_of_range = TrainingData {
        pairs: vec![TrainingPair {
            goal: 0,
            premise: 10,
        }],
        ..data.clone()
    };
    assert!(matches!(
        train(&out_of_range, &config(), None),
        Err(DenseError::TrainingData(_))
    ));
    let wrong_lists = TrainingData {
        hard_negatives: vec![vec![1]],
        ..data.clone()
    };
    assert!(matches!(
        train(&wrong_lists, &config(), None),
        Err(DenseError::TrainingData(_))
    ));
    let zero_batch = TrainConfig {
        batch_size: 0,
        ..config()
    };
    assert!(matches!(
        train(&data, &zero_batch, None),
        Err(DenseError::InvalidSetting {
            field: "batch_size",
            ..
        })
    ));
}

#[test]
fn a_pair_budget_per_epoch_trains_on_a_sample_and_no_budget_on_everything() {
    let (data, _) = ring_and_scheduler_task(8, 60, 80, 0);
    let cfg = TrainConfig {
        epochs: 2,
        ..config()
    };
    let bytes = |c: &TrainConfig| train(&data, c, None).expect("valid data").0.to_bytes();
    let everything = bytes(&cfg);
    // A budget at least the number of pairs changes nothing.
    let roomy = TrainConfig {
        pairs_per_epoch: Some(data.pairs.len()),
        ..cfg
    };
    assert_eq!(bytes(&roomy), everything);
    // A smaller one trains on fewer pairs, so the encoder differs.
    let tight = TrainConfig {
        pairs_per_epoch: Some(data.pairs.len() / 4),
        ..cfg
    };
    assert_ne!(bytes(&tight), everything);
    let zero = TrainConfig {
        pairs_per_epoch: Some(0),
        ..cfg
    };
    assert!(matches!(
        train(&data, &zero, None),
        Err(DenseError::InvalidSetting {
            field: "pairs_per_epoch",
            ..
        })
    ));
}
