//! The loopback HTTP server of `stet watch`, on `tiny_http`: small, synchronous and
//! without an async runtime, which a server for one reader on one machine does not
//! need. It serves three paths (`/`, the event stream `/events`, `/health`), each to
//! GET only, and only to requests addressed to the loopback address and its port, so a
//! web page elsewhere cannot reach it by rebinding a name of its own to 127.0.0.1.

use std::io::Write;
use std::net::{Ipv4Addr, TcpListener};
use std::sync::Arc;
use std::sync::mpsc;
use std::time::Duration;

use tiny_http::{Header, Method, Request, Response};

use super::live::Live;
use super::page;

/// A comment line sent on a quiet stream, so a closed page is noticed and its thread
/// ends.
const KEEP_ALIVE: Duration = Duration::from_secs(15);

/// What a path is.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Route {
    Page,
    Events,
    Health,
    NotFound,
}

/// Exact paths only: nothing is decoded or resolved, so no spelling of `..` reaches a
/// file, and a query string makes a path unknown.
fn route(url: &str) -> Route {
    match url {
        "/" => Route::Page,
        "/events" => Route::Events,
        "/health" => Route::Health,
        _ => Route::NotFound,
    }
}

/// Whether `host` (the request's `Host` header) names this server on loopback.
fn host_allowed(host: &str, port: u16) -> bool {
    host == format!("127.0.0.1:{port}") || host == format!("localhost:{port}")
}

/// The server bound to 127.0.0.1.
pub(crate) struct Server {
    http: tiny_http::Server,
    pub(crate) port: u16,
}

/// Binds 127.0.0.1:`port` (0: a free port).
pub(crate) fn bind(port: u16) -> std::io::Result<Server> {
    let listener = TcpListener::bind((Ipv4Addr::LOCALHOST, port))?;
    let port = listener.local_addr()?.port();
    let http = tiny_http::Server::from_listener(listener, None).map_err(std::io::Error::other)?;
    Ok(Server { http, port })
}

impl Server {
    /// Answers requests until the process ends.
    pub(crate) fn serve(self, live: Arc<Live>) {
        for request in self.http.incoming_requests() {
            answer(request, &live, self.port);
        }
    }
}

fn answer(request: Request, live: &Arc<Live>, port: u16) {
    let host = request
        .headers()
        .iter()
        .find(|header| header.field.equiv("Host"))
        .map(|header| header.value.as_str().to_string());
    let Some(host) = host.filter(|host| host_allowed(host, port)) else {
        return respond(
            request,
            text(403, "this server answers only to 127.0.0.1\n"),
        );
    };
    if !matches!(request.method(), Method::Get | Method::Head) {
        return respond(request, text(405, "only GET\n"));
    }
    match route(request.url()) {
        Route::Page => {
            let response = Response::from_string(live.page(&host))
                .with_header(header("Content-Type", "text/html; charset=utf-8"))
                .with_header(header("Content-Security-Policy", &page::policy(&host)));
            respond(request, response);
        }
        Route::Health => {
            let json = serde_json::to_string(&live.health()).expect("health serialises");
            let response =
                Response::from_string(json).with_header(header("Content-Type", "application/json"));
            respond(request, response);
        }
        Route::Events => {
            let live = live.clone();
            std::thread::spawn(move || stream_events(request, &live));
        }
        Route::NotFound => respond(request, text(404, "not found\n")),
    }
}

/// Sends the page's events until it goes away.
fn stream_events(request: Request, live: &Live) {
    let (sender, events) = mpsc::channel();
    if !live.subscribe(sender) {
        return respond(request, text(503, "too many open pages\n"));
    }
    let mut stream = request.into_writer();
    let head = "HTTP/1.1 200 OK\r\nContent-Type: text/event-stream\r\n\
                Cache-Control: no-store\r\nX-Content-Type-Options: nosniff\r\n\
                Connection: close\r\n\r\n";
    if stream.write_all(head.as_bytes()).is_err() {
        return;
    }
    loop {
        let chunk = match events.recv_timeout(KEEP_ALIVE) {
            Ok(event) => event,
            Err(mpsc::RecvTimeoutError::Timeout) => ": still here\n\n".to_string(),
            Err(mpsc::RecvTimeoutError::Disconnected) => return,
        };
        if stream
            .write_all(chunk.as_bytes())
            .and_then(|()| stream.flush())
            .is_err()
        {
            return;
        }
    }
}

fn text(status: u16, body: &str) -> Response<std::io::Cursor<Vec<u8>>> {
    Response::from_string(body)
        .with_status_code(status)
        .with_header(header("Content-Type", "text/plain; charset=utf-8"))
}

fn header(name: &str, value: &str) -> Header {
    Header::from_bytes(name.as_bytes(), value.as_bytes()).expect("a valid header")
}

/// Every response says no caching and no sniffing; a page that went away meanwhile is
/// no error of ours.
fn respond(request: Request, response: Response<std::io::Cursor<Vec<u8>>>) {
    let response = response
        .with_header(header("Cache-Control", "no-store"))
        .with_header(header("X-Content-Type-Options", "nosniff"));
    let _ = request.respond(response);
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn only_the_three_exact_paths_are_served() {
        assert_eq!(route("/"), Route::Page);
        assert_eq!(route("/events"), Route::Events);
        assert_eq!(route("/health"), Route::Health);
        for refused in [
            "/../../etc/passwd",
            "/%2e%2e/%2e%2e/etc/passwd",
            "/?x",
            "//",
            "/index.html",
            "",
        ] {
            assert_eq!(route(refused), Route::NotFound, "{refused}");
        }
    }

    #[test]
    fn only_loopback_hosts_with_our_port_are_answered() {
        assert!(host_allowed("127.0.0.1:8123", 8123));
        assert!(host_allowed("localhost:8123", 8123));
        assert!(!host_allowed("127.0.0.1:8124", 8123));
        assert!(!host_allowed("attacker.example:8123", 8123));
        assert!(!host_allowed("127.0.0.1", 8123));
    }
}
