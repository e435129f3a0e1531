//! A sentence-embedding model folder on disk: which files it has, what they say, and its
//! identity.
//!
//! Takes a folder laid out as sentence-transformers saves a model (`config.json`,
//! `model.safetensors`, `tokenizer.json`, `modules.json`, the pooling module's
//! `config.json`, optionally `sentence_bert_config.json`); gives a [`ModelFolder`]: the
//! parsed BERT configuration, the pooling mode, whether vectors are normalised, the maximum
//! sequence length, the raw bytes of the weights and tokenizer, and a [`ModelIdentity`]
//! (file sizes and BLAKE3 checksums, dimension, pooling) that an index records. It can
//! install the same files into another folder (hard links where the file system allows,
//! copies otherwise). It deliberately does not run the model, and reads only BERT models
//! whose modules are a transformer, a pooling and optionally a normalisation: anything else
//! (a dense projection, another architecture) is refused with the file that says so.

use std::collections::BTreeMap;
use std::fs;
use std::path::{Path, PathBuf};

use candle_transformers::models::bert::Config as BertConfig;
use serde::{Deserialize, Serialize};

use super::pooling::Pooling;
use super::TransformerError;

/// The model's architecture and sizes.
pub const CONFIG_FILE: &str = "config.json";
/// The weights.
pub const WEIGHTS_FILE: &str = "model.safetensors";
/// The tokenizer (Hugging Face `tokenizers` format).
pub const TOKENIZER_FILE: &str = "tokenizer.json";
/// The list of sentence-transformers modules (optional).
pub const MODULES_FILE: &str = "modules.json";
/// The maximum sequence length (optional).
pub const SENTENCE_CONFIG_FILE: &str = "sentence_bert_config.json";
/// Where the pooling configuration is when `modules.json` does not say.
pub const DEFAULT_POOLING_FILE: &str = "1_Pooling/config.json";

/// Size and BLAKE3 checksum of one model file.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct FileSum {
    pub bytes: u64,
    pub blake3: String,
}

/// What identifies a model: an index records it, and a rebuild re-uses embeddings only
/// when the fingerprint is the same.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct ModelIdentity {
    /// `_name_or_path` of `config.json`, or the folder's name.
    pub name: String,
    /// `model_type` of `config.json`.
    pub architecture: String,
    pub dim: usize,
    pub layers: usize,
    pub pooling: Pooling,
    pub normalize: bool,
    /// Longer texts are truncated to this many tokens (special tokens included).
    pub max_seq_length: usize,
    /// Every file read, by path relative to the model folder.
    pub files: BTreeMap<String, FileSum>,
    /// BLAKE3 over the files' checksums and the settings above, hex.
    pub fingerprint: String,
}

/// A model folder read and checked, its weights in memory.
pub struct ModelFolder {
    pub dir: PathBuf,
    pub config: BertConfig,
    pub identity: ModelIdentity,
    pub tokenizer_bytes: Vec<u8>,
    pub weights: Vec<u8>,
}

/// One entry of `modules.json`.
#[derive(Deserialize)]
struct ModuleEntry {
    #[serde(default)]
    path: String,
    #[serde(rename = "type")]
    kind: String,
}

/// The fields of `sentence_bert_config.json` quarry reads.
#[derive(Deserialize)]
struct SentenceConfig {
    max_seq_length: Option<usize>,
}

/// The fields of `config.json` beyond candle's BERT configuration.
#[derive(Deserialize)]
struct ConfigExtras {
    #[serde(rename = "_name_or_path")]
    name: Option<String>,
    model_type: Option<String>,
}

/// What `modules.json` says: where the pooling configuration is and whether vectors are
/// normalised.
fn read_modules(dir: &Path) -> Result<(String, bool), TransformerError> {
    let path = dir.join(MODULES_FILE);
    if !path.is_file() {
        return Ok((DEFAULT_POOLING_FILE.to_string(), false));
    }
    let bytes = read(&path)?;
    let modules: Vec<ModuleEntry> =
        serde_json::from_slice(&bytes).map_err(|e| TransformerError::BadFile {
            path: path.clone(),
            message: format!("not a list of modules: {e}"),
        })?;
    let mut pooling = None;
    let mut normalize = false;
    for m in &modules {
        let kind = m.kind.rsplit('.').next().unwrap_or(&m.kind);
        match kind {
            "Transformer" => {}
            "Pooling" => {
                let folder = m.path.trim_end_matches('/');
                pooling = Some(if folder.is_empty() {
                    "config.json".to_string()
                } else {
                    format!("{folder}/config.json")
                });
            }
            "Normalize" => normalize = true,
            other => {
                return Err(TransformerError::BadFile {
                    path,
                    message: format!(
                        "lists a `{other}` module; quarry runs only Transformer, Pooling and \
                         Normalize modules"
                    ),
                })
            }
        }
    }
    let pooling = pooling.ok_or_else(|| TransformerError::BadFile {
        path: path.clone(),
        message: "lists no Pooling module".into(),
    })?;
    Ok((pooling, normalize))
}

fn read(path: &Path) -> Result<Vec<u8>, TransformerError> {
    fs::read(path).map_err(|source| TransformerError::Io {
        path: path.to_path_buf(),
        source,
    })
}

/// Reads a file the model cannot go without.
fn read_required(dir: &Path, file: &str, role: &'static str) -> Result<Vec<u8>, TransformerError> {
    let path = dir.join(file);
    if !path.is_file() {
        return Err(TransformerError::MissingFile {
            dir: dir.to_path_buf(),
            file: file.to_string(),
            role,
        });
    }
    read(&path)
}

fn sum(bytes: &[u8]) -> FileSum {
    FileSum {
        bytes: bytes.len() as u64,
        blake3: blake3::hash(bytes).to_hex().to_string(),
    }
}

/// Refuses a configuration that would make the BERT code divide by zero or index out of
/// range, naming the field.
fn check_config(config: &BertConfig, path: &Path) -> Result<(), TransformerError> {
    let bad = |message: String| TransformerError::BadFile {
        path: path.to_path_buf(),
        message,
    };
    let positive = [
        ("vocab_size", config.vocab_size),
        ("hidden_size", config.hidden_size),
        ("num_hidden_layers", config.num_hidden_layers),
        ("num_attention_heads", config.num_attention_heads),
        ("intermediate_size", config.intermediate_size),
        ("max_position_embeddings", config.max_position_embeddings),
        ("type_vocab_size", config.type_vocab_size),
    ];
    if let Some((field, _)) = positive.iter().find(|(_, v)| *v == 0) {
        return Err(bad(format!("`{field}` is 0")));
    }
    if !config
        .hidden_size
        .is_multiple_of(config.num_attention_heads)
    {
        return Err(bad(format!(
            "`hidden_size` {} is not a multiple of `num_attention_heads` {}",
            config.hidden_size, config.num_attention_heads
        )));
    }
    if config.pad_token_id >= config.vocab_size {
        return Err(bad(format!(
            "`pad_token_id` {} is outside the vocabulary of {}",
            config.pad_token_id, config.vocab_size
        )));
    }
    Ok(())
}

impl ModelFolder {
    /// Reads and checks the model folder `dir`, keeping the weights in memory.
    pub fn read(dir: &Path) -> Result<ModelFolder, TransformerError> {
        if !dir.is_dir() {
            return Err(TransformerError::NotAFolder(dir.to_path_buf()));
        }
        let mut files = BTreeMap::new();
        let (pooling_file, normalize) = read_modules(dir)?;
        if dir.join(MODULES_FILE).is_file() {
            files.insert(
                MODULES_FILE.to_string(),
                sum(&read(&dir.join(MODULES_FILE))?),
            );
        }

        let config_path = dir.join(CONFIG_FILE);
        let config_bytes = read_required(dir, CONFIG_FILE, "the model's architecture")?;
        let config: BertConfig =
            serde_json::from_slice(&config_bytes).map_err(|e| TransformerError::BadFile {
                path: config_path.clone(),
                message: format!("not a BERT configuration: {e}"),
            })?;
        let extras: ConfigExtras =
            serde_json::from_slice(&config_bytes).map_err(|e| TransformerError::BadFile {
                path: config_path.clone(),
                message: format!("not a BERT configuration: {e}"),
            })?;
        let architecture = extras.model_type.unwrap_or_else(|| "bert".to_string());
        if architecture != "bert" {
            return Err(TransformerError::BadFile {
                path: config_path,
                message: format!(
                    "`model_type` is `{architecture}`; quarry runs BERT models (`bert`) only"
                ),
            });
        }
        check_config(&config, &config_path)?;
        files.insert(CONFIG_FILE.to_string(), sum(&config_bytes));

        let pooling_bytes = read_required(dir, &pooling_file, "the pooling configuration")?;
        let pooling_path = dir.join(&pooling_file);
        let (pooling, pooled_dim) = Pooling::from_config(&pooling_bytes, &pooling_path)?;
        if pooled_dim != config.hidden_size {
            return Err(TransformerError::Dimensions {
                path: pooling_path,
                found: pooled_dim,
                expected: config.hidden_size,
            });
        }
        files.insert(pooling_file, sum(&pooling_bytes));

        let mut max_seq_length = config.max_position_embeddings;
        let sentence_path = dir.join(SENTENCE_CONFIG_FILE);
        if sentence_path.is_file() {
            let bytes = read(&sentence_path)?;
            let sentence: SentenceConfig =
                serde_json::from_slice(&bytes).map_err(|e| TransformerError::BadFile {
                    path: sentence_path.clone(),
                    message: format!("not a sentence-transformers configuration: {e}"),
                })?;
            match sentence.max_seq_length {
                Some(0) => {
                    return Err(TransformerError::BadFile {
                        path: sentence_path,
                        message: "`max_seq_length` is 0".into(),
                    })
                }
                Some(n) => max_seq_length = n.min(config.max_position_embeddings),
                None => {}
            }
            files.insert(SENTENCE_CONFIG_FILE.to_string(), sum(&bytes));
        }

        let tokenizer_bytes = read_required(dir, TOKENIZER_FILE, "the tokenizer")?;
        files.insert(TOKENIZER_FILE.to_string(), sum(&tokenizer_bytes));
        let weights = read_required(dir, WEIGHTS_FILE, "the weights")?;
        files.insert(WEIGHTS_FILE.to_string(), sum(&weights));

        let name = extras
            .name
            .filter(|n| !n.is_empty())
            .or_else(|| dir.file_name().map(|n| n.to_string_lossy().into_owned()))
            .unwrap_or_default();
        let mut hasher = blake3::Hasher::new();
        for (file, s) in &files {
            hasher.update(file.as_bytes());
            hasher.update(&[0]);
            hasher.update(s.blake3.as_bytes());
        }
        hasher.update(format!("{pooling:?} {normalize} {max_seq_length}").as_bytes());
        let identity = ModelIdentity {
            name,
            architecture,
            dim: config.hidden_size,
            layers: config.num_hidden_layers,
            pooling,
            normalize,
            max_seq_length,
            files,
            fingerprint: hasher.finalize().to_hex().to_string(),
        };
        Ok(ModelFolder {
            dir: dir.to_path_buf(),
            config,
            identity,
            tokenizer_bytes,
            weights,
        })
    }

    /// Puts every file of the identity into `dest` under the same relative paths: a hard
    /// link when `dest` is on the same file system, a copy otherwise. Returns how many were
    /// linked and how many copied.
    pub fn install(&self, dest: &Path) -> Result<(usize, usize), TransformerError> {
        let (mut linked, mut copied) = (0, 0);
        for file in self.identity.files.keys() {
            let from = self.dir.join(file);
            let to = dest.join(file);
            if let Some(parent) = to.parent() {
                fs::create_dir_all(parent).map_err(|source| TransformerError::Io {
                    path: parent.to_path_buf(),
                    source,
                })?;
            }
            if fs::hard_link(&from, &to).is_ok() {
                linked += 1;
            } else {
                fs::copy(&from, &to).map_err(|source| TransformerError::Io {
                    path: to.clone(),
                    source,
                })?;
                copied += 1;
            }
        }
        Ok((linked, copied))
    }

    /// Checks that this folder is the model `expected` describes, naming the first file
    /// that differs.
    pub fn check_identity(&self, expected: &ModelIdentity) -> Result<(), TransformerError> {
        if self.identity.fingerprint == expected.fingerprint {
            return Ok(());
        }
        let differing = expected
            .files
            .iter()
            .find(|(file, s)| self.identity.files.get(*file) != Some(s))
            .map(|(file, _)| file.clone())
            .or_else(|| {
                self.identity
                    .files
                    .keys()
                    .find(|f| !expected.files.contains_key(*f))
                    .cloned()
            });
        Err(TransformerError::NotTheRecordedModel {
            path: match differing {
                Some(file) => self.dir.join(file),
                None => self.dir.clone(),
            },
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A tiny BERT configuration with the fields of all-MiniLM-L6-v2's `config.json`.
    const CONFIG: &str = r#"{"vocab_size": 30, "hidden_size": 8, "num_hidden_layers": 1,
        "num_attention_heads": 2, "intermediate_size": 16, "hidden_act": "gelu",
        "hidden_dropout_prob": 0.1, "max_position_embeddings": 32, "type_vocab_size": 2,
        "initializer_range": 0.02, "layer_norm_eps": 1e-12, "pad_token_id": 0,
        "model_type": "bert"}"#;
    const MODULES: &str = r#"[{"idx": 0, "name": "0", "path": "", "type": "sentence_transformers.models.Transformer"},
        {"idx": 1, "name": "1", "path": "1_Pooling", "type": "sentence_transformers.models.Pooling"},
        {"idx": 2, "name": "2", "path": "2_Normalize", "type": "sentence_transformers.models.Normalize"}]"#;
    const POOLING: &str = r#"{"word_embedding_dimension": 8, "pooling_mode_mean_tokens": true}"#;

    /// A model folder with the configuration files (no tokenizer, no weights).
    fn folder(config: &str, modules: &str, pooling: &str) -> tempfile::TempDir {
        let dir = tempfile::tempdir().expect("temporary folder");
        fs::write(dir.path().join(CONFIG_FILE), config).expect("config");
        fs::write(dir.path().join(MODULES_FILE), modules).expect("modules");
        fs::create_dir_all(dir.path().join("1_Pooling")).expect("pooling folder");
        fs::write(dir.path().join(DEFAULT_POOLING_FILE), pooling).expect("pooling");
        dir
    }

    fn error_of(dir: &tempfile::TempDir) -> TransformerError {
        match ModelFolder::read(dir.path()) {
            Err(e) => e,
            Ok(_) => panic!("a folder without weights was read"),
        }
    }

    #[test]
    fn the_first_missing_file_is_named() {
        let dir = folder(CONFIG, MODULES, POOLING);
        match error_of(&dir) {
            TransformerError::MissingFile { file, .. } => assert_eq!(file, TOKENIZER_FILE),
            other => panic!("expected a missing tokenizer, got {other}"),
        }
        fs::write(dir.path().join(TOKENIZER_FILE), "{}").expect("tokenizer");
        match error_of(&dir) {
            TransformerError::MissingFile { file, .. } => assert_eq!(file, WEIGHTS_FILE),
            other => panic!("expected missing weights, got {other}"),
        }
        let gone = tempfile::tempdir().expect("temporary folder");
        let e = ModelFolder::read(&gone.path().join("nothing")).err();
        assert!(matches!(e, Some(TransformerError::NotAFolder(_))));
    }

    #[test]
    fn what_quarry_cannot_run_is_refused_with_the_file() {
        let dense = MODULES.replace("Normalize", "Dense");
        let e = error_of(&folder(CONFIG, &dense, POOLING)).to_string();
        assert!(e.contains("modules.json") && e.contains("`Dense`"), "{e}");

        let roberta = CONFIG.replace("\"bert\"", "\"roberta\"");
        let e = error_of(&folder(&roberta, MODULES, POOLING)).to_string();
        assert!(e.contains("config.json") && e.contains("roberta"), "{e}");

        let heads = CONFIG.replace("\"num_attention_heads\": 2", "\"num_attention_heads\": 3");
        let e = error_of(&folder(&heads, MODULES, POOLING)).to_string();
        assert!(e.contains("not a multiple"), "{e}");

        let wide = POOLING.replace(": 8", ": 16");
        match error_of(&folder(CONFIG, MODULES, &wide)) {
            TransformerError::Dimensions {
                found, expected, ..
            } => assert_eq!((found, expected), (16, 8)),
            other => panic!("expected a dimension mismatch, got {other}"),
        }

        let e = error_of(&folder("{\"hidden_size\": 8}", MODULES, POOLING)).to_string();
        assert!(e.contains("not a BERT configuration"), "{e}");
    }
}
