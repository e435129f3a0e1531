//! Request counts, a latency histogram and index gauges, in the Prometheus text format.
//!
//! Takes one observation per finished request (route template, method, status, duration)
//! and the served index's sizes; gives the exposition text of `GET /metrics` (Prometheus
//! text format 0.0.4, written by hand). Routes are labelled by their template
//! (`/v1/declarations/{name}`), and every unmatched path by `unmatched`, so a client cannot
//! grow the label set. It does not time requests itself (the middleware in `routes/` does).

use std::collections::BTreeMap;
use std::fmt::Write;
use std::sync::Mutex;
use std::time::Duration;

/// Upper bounds of the latency histogram's buckets, in seconds.
pub const LATENCY_BUCKETS: [f64; 14] = [
    0.0005, 0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0, 10.0,
];

#[derive(Default)]
struct Histogram {
    /// Count per bucket (not cumulative); one more slot for `+Inf`.
    buckets: [u64; LATENCY_BUCKETS.len() + 1],
    sum: f64,
    count: u64,
}

impl Histogram {
    fn observe(&mut self, seconds: f64) {
        let slot = LATENCY_BUCKETS
            .iter()
            .position(|&le| seconds <= le)
            .unwrap_or(LATENCY_BUCKETS.len());
        if let Some(b) = self.buckets.get_mut(slot) {
            *b += 1;
        }
        self.sum += seconds;
        self.count += 1;
    }
}

#[derive(Default)]
struct Series {
    /// (route, method, status) → count.
    requests: BTreeMap<(String, String, u16), u64>,
    /// route → latency.
    latency: BTreeMap<String, Histogram>,
}

/// What `GET /metrics` reports about the served index.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct IndexGauges {
    /// Declarations in the served index.
    pub declarations: u64,
    /// Source files in the served index.
    pub files: u64,
    /// Modules in the served index.
    pub modules: u64,
    /// Bytes of every part of the generation on disk.
    pub bytes: u64,
    /// Generations swapped in since start.
    pub reloads: u64,
    /// Generations refused since start.
    pub reload_failures: u64,
    /// Seconds since the server started.
    pub uptime_seconds: f64,
    /// Requests being answered now.
    pub in_flight: u64,
}

/// The server's counters; shared by every request.
#[derive(Default)]
pub struct Metrics {
    series: Mutex<Series>,
}

impl Metrics {
    /// Records one finished request.
    pub fn observe(&self, route: &str, method: &str, status: u16, elapsed: Duration) {
        // A poisoned lock only means another request panicked mid-update; the counts are
        // still usable.
        let mut s = self.series.lock().unwrap_or_else(|p| p.into_inner());
        *s.requests
            .entry((route.to_string(), method.to_string(), status))
            .or_default() += 1;
        s.latency
            .entry(route.to_string())
            .or_default()
            .observe(elapsed.as_secs_f64());
    }

    /// How many requests were recorded for `route` with `status`.
    pub fn count(&self, route: &str, status: u16) -> u64 {
        let s = self.series.lock().unwrap_or_else(|p| p.into_inner());
        s.requests
            .iter()
            .filter(|((r, _, st), _)| r == route && *st == status)
            .map(|(_, n)| n)
            .sum()
    }

    /// The exposition text.
    pub fn render(&self, gauges: &IndexGauges) -> String {
        let s = self.series.lock().unwrap_or_else(|p| p.into_inner());
        let mut out = String::new();
        out.push_str("# HELP quarry_http_requests_total HTTP requests answered, by route, method and status.\n");
        out.push_str("# TYPE quarry_http_requests_total counter\n");
        for ((route, method, status), n) in &s.requests {
            let _ = writeln!(
                out,
                "quarry_http_requests_total{{route=\"{}\",method=\"{}\",status=\"{status}\"}} {n}",
                escape(route),
                escape(method)
            );
        }
        out.push_str("# HELP quarry_http_request_duration_seconds Time from receiving a request to its response, by route.\n");
        out.push_str("# TYPE quarry_http_request_duration_seconds histogram\n");
        for (route, h) in &s.latency {
            let route = escape(route);
            let mut cumulative = 0u64;
            for (i, le) in LATENCY_BUCKETS.iter().enumerate() {
                cumulative += h.buckets.get(i).copied().unwrap_or(0);
                let _ = writeln!(
                    out,
                    "quarry_http_request_duration_seconds_bucket{{route=\"{route}\",le=\"{le}\"}} {cumulative}"
                );
            }
            let _ = writeln!(
                out,
                "quarry_http_request_duration_seconds_bucket{{route=\"{route}\",le=\"+Inf\"}} {}",
                h.count
            );
            let _ = writeln!(
                out,
                "quarry_http_request_duration_seconds_sum{{route=\"{route}\"}} {}",
                h.sum
            );
            let _ = writeln!(
                out,
                "quarry_http_request_duration_seconds_count{{route=\"{route}\"}} {}",
                h.count
            );
        }
        let gauge = |out: &mut String, name: &str, help: &str, kind: &str, value: String| {
            let _ = writeln!(out, "# HELP {name} {help}");
            let _ = writeln!(out, "# TYPE {name} {kind}");
            let _ = writeln!(out, "{name} {value}");
        };
        gauge(
            &mut out,
            "quarry_http_requests_in_flight",
            "Requests being answered now.",
            "gauge",
            gauges.in_flight.to_string(),
        );
        gauge(
            &mut out,
            "quarry_index_declarations",
            "Declarations in the served index.",
            "gauge",
            gauges.declarations.to_string(),
        );
        gauge(
            &mut out,
            "quarry_index_files",
            "Source files in the served index.",
            "gauge",
            gauges.files.to_string(),
        );
        gauge(
            &mut out,
            "quarry_index_modules",
            "Modules in the served index.",
            "gauge",
            gauges.modules.to_string(),
        );
        gauge(
            &mut out,
            "quarry_index_bytes",
            "Bytes on disk of the served index generation.",
            "gauge",
            gauges.bytes.to_string(),
        );
        gauge(
            &mut out,
            "quarry_index_reloads_total",
            "New index generations swapped in since start.",
            "counter",
            gauges.reloads.to_string(),
        );
        gauge(
            &mut out,
            "quarry_index_reload_failures_total",
            "New index generations refused because they could not be opened.",
            "counter",
            gauges.reload_failures.to_string(),
        );
        gauge(
            &mut out,
            "quarry_uptime_seconds",
            "Seconds since the server started.",
            "gauge",
            format!("{:.3}", gauges.uptime_seconds),
        );
        out
    }
}

/// Escapes a label value: backslash, double quote and line feed (Prometheus text format).
fn escape(value: &str) -> String {
    value
        .replace('\\', "\\\\")
        .replace('"', "\\\"")
        .replace('\n', "\\n")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn buckets_are_cumulative_and_end_with_the_total() {
        let m = Metrics::default();
        for ms in [0.2, 0.7, 3.0, 40.0, 20_000.0] {
            m.observe(
                "/v1/rank",
                "POST",
                200,
                Duration::from_secs_f64(ms / 1000.0),
            );
        }
        m.observe("/v1/rank", "POST", 422, Duration::from_millis(1));
        let text = m.render(&IndexGauges::default());
        assert!(text.contains(
            "quarry_http_requests_total{route=\"/v1/rank\",method=\"POST\",status=\"200\"} 5"
        ));
        assert!(text.contains(
            "quarry_http_requests_total{route=\"/v1/rank\",method=\"POST\",status=\"422\"} 1"
        ));
        // 0.2 ms ≤ 0.5 ms; 0.7 ms and 1 ms ≤ 1 ms; 3 ms ≤ 5 ms; 40 ms ≤ 50 ms; 20 s only +Inf.
        let bucket = |le: &str| {
            let key = format!(
                "quarry_http_request_duration_seconds_bucket{{route=\"/v1/rank\",le=\"{le}\"}} "
            );
            let line = text.lines().find(|l| l.starts_with(&key)).unwrap();
            line[key.len()..].parse::<u64>().unwrap()
        };
        assert_eq!(bucket("0.0005"), 1);
        assert_eq!(bucket("0.001"), 3);
        assert_eq!(bucket("0.005"), 4);
        assert_eq!(bucket("0.05"), 5);
        assert_eq!(bucket("10"), 5);
        assert_eq!(bucket("+Inf"), 6);
        assert!(text.contains("quarry_http_request_duration_seconds_count{route=\"/v1/rank\"} 6"));
        assert_eq!(m.count("/v1/rank", 422), 1);
    }

    #[test]
    fn label_values_are_escaped() {
        assert_eq!(escape("a\"b\\c\nd"), "a\\\"b\\\\c\\nd");
    }

    #[test]
    fn every_metric_has_help_and_type_lines_before_its_samples() {
        let m = Metrics::default();
        m.observe("/healthz", "GET", 200, Duration::from_micros(30));
        let text = m.render(&IndexGauges::default());
        let mut typed = std::collections::BTreeSet::new();
        for line in text.lines() {
            if let Some(rest) = line.strip_prefix("# TYPE ") {
                typed.insert(rest.split(' ').next().unwrap().to_string());
            } else if !line.starts_with('#') {
                let name = line.split(['{', ' ']).next().unwrap();
                let family = ["_bucket", "_sum", "_count"]
                    .iter()
                    .find_map(|s| name.strip_suffix(s).filter(|f| typed.contains(*f)))
                    .unwrap_or(name);
                assert!(
                    typed.contains(family),
                    "sample `{line}` before its TYPE line"
                );
            }
        }
    }
}
