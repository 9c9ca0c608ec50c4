//! The end of a live session drains the link: a demo session (simulated device on a
//! pseudo-terminal, the same watch session as `frothline watch`) reads every window result
//! and every frame the device sent, and the link is not reported down at the end. (Before,
//! the frames in flight when the session ended were dropped: 476 of 480 results in 12 s.)
//! The reference is the device's own count of what it wrote (common practice, no source:
//! a lossless link delivers what was sent).

#[cfg(unix)]
#[test]
fn a_demo_session_reads_every_result_the_device_sent() {
    let out = tempfile::tempdir().unwrap();
    let args = frothline_host::live::demo::DemoArgs {
        plain: true,
        duration: 3.0,
        out: out.path().join("demo"),
        // Short windows: a frame every 20 ms, so frames are in flight whenever it ends.
        window: Some("20ms".parse().unwrap()),
        transient: false,
        baud: 115_200,
        extras: false,
    };
    let s = frothline_host::live::demo::run(&args).unwrap();
    assert!(s.device.windows_sent > 0);
    assert_eq!(s.watch.report.windows, s.device.windows_sent);
    let port = &s.watch.report.ports[0];
    assert_eq!(port.decoder.frames, s.device.frames_sent, "{port:?}");
    assert_eq!(port.bytes, s.device.bytes_sent, "{port:?}");
    assert!(
        s.watch.report.link_gaps.is_empty(),
        "{:?}",
        s.watch.report.link_gaps
    );
}
