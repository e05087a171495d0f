//! # qemu-icount
//!
//! A QEMU TCG plugin that counts the guest instructions a run executes and prints the total
//! at exit. Load it with
//! `qemu-system-arm ... -plugin target/tools/release/libqemu_icount.so[,outfile=PATH]`.
//!
//! At translation time each translation block (TB) gets one inline operation that adds the
//! block's instruction count to a 64-bit counter whenever the block starts to execute. No
//! helper call, no locks; the guest runs on one vCPU, so the count is exact and identical run
//! to run for the same ELF and input. (A block left early by an exception is counted whole;
//! that too is deterministic. Semihosting calls are one `bkpt` each: the host's work for the
//! call is not guest instructions.)
//!
//! At exit the plugin writes `insns N` through QEMU's log (stderr unless `-D` names a file)
//! and, with `outfile=PATH`, also to PATH, so scripts read the number from a file.
//!
//! The C ABI is declared here by hand from QEMU 7.2's `include/qemu/qemu-plugin.h` (plugin
//! API version 1): Debian ships no header and this crate needs no bindgen.

use core::ffi::{c_char, c_int, c_void};
use std::ffi::{CStr, CString};
use std::sync::OnceLock;
use std::sync::atomic::{AtomicU64, Ordering};

/// `qemu_plugin_id_t` (`uint64_t`).
type PluginId = u64;

/// Opaque `struct qemu_plugin_tb`.
#[repr(C)]
struct PluginTb {
    _private: [u8; 0],
}

/// `enum qemu_plugin_op`: `QEMU_PLUGIN_INLINE_ADD_U64` is its only (and first) variant in 7.2.
const QEMU_PLUGIN_INLINE_ADD_U64: c_int = 0;

/// `qemu_plugin_vcpu_tb_trans_cb_t`.
type TbTransCb = extern "C" fn(id: PluginId, tb: *mut PluginTb);
/// `qemu_plugin_udata_cb_t`.
type UdataCb = extern "C" fn(id: PluginId, userdata: *mut c_void);

unsafe extern "C" {
    fn qemu_plugin_register_vcpu_tb_trans_cb(id: PluginId, cb: TbTransCb);
    fn qemu_plugin_tb_n_insns(tb: *const PluginTb) -> usize;
    fn qemu_plugin_register_vcpu_tb_exec_inline(
        tb: *mut PluginTb,
        op: c_int,
        ptr: *mut c_void,
        imm: u64,
    );
    fn qemu_plugin_register_atexit_cb(id: PluginId, cb: UdataCb, userdata: *mut c_void);
    fn qemu_plugin_outs(string: *const c_char);
}

/// The plugin API version this plugin was written against; QEMU refuses a plugin whose
/// version is outside the range it supports.
#[unsafe(no_mangle)]
pub static qemu_plugin_version: c_int = 1;

/// The counter the generated code adds to. Only TCG-generated code and the exit callback
/// touch it; the atomic type gives it a stable address and interior mutability.
static INSNS: AtomicU64 = AtomicU64::new(0);

/// Where to write the total at exit, from the `outfile=PATH` plugin argument.
static OUTFILE: OnceLock<String> = OnceLock::new();

extern "C" fn tb_trans(_id: PluginId, tb: *mut PluginTb) {
    // SAFETY: `tb` is the live translation block QEMU hands to this callback; the counter is
    // a static, so the pointer baked into the generated code stays valid for the whole run.
    unsafe {
        let n = qemu_plugin_tb_n_insns(tb) as u64;
        qemu_plugin_register_vcpu_tb_exec_inline(
            tb,
            QEMU_PLUGIN_INLINE_ADD_U64,
            INSNS.as_ptr().cast::<c_void>(),
            n,
        );
    }
}

extern "C" fn at_exit(_id: PluginId, _userdata: *mut c_void) {
    let n = INSNS.load(Ordering::SeqCst);
    let line = format!("insns {n}\n");
    if let Ok(c) = CString::new(line.clone()) {
        // SAFETY: a valid NUL-terminated string that outlives the call.
        unsafe { qemu_plugin_outs(c.as_ptr()) };
    }
    if let Some(path) = OUTFILE.get()
        && let Err(e) = std::fs::write(path, line)
    {
        eprintln!("qemu-icount: cannot write {path}: {e}");
    }
}

/// Entry point QEMU calls after loading the plugin. Accepts `outfile=PATH`; any other
/// argument is an error (non-zero return makes QEMU stop with a message).
///
/// # Safety
/// Called by QEMU with `argc` valid NUL-terminated strings in `argv`.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn qemu_plugin_install(
    id: PluginId,
    _info: *const c_void,
    argc: c_int,
    argv: *const *const c_char,
) -> c_int {
    let argc = usize::try_from(argc).unwrap_or(0);
    for i in 0..argc {
        // SAFETY: QEMU passes `argc` valid pointers to NUL-terminated strings.
        let arg = unsafe { CStr::from_ptr(*argv.add(i)) }.to_string_lossy();
        match arg.strip_prefix("outfile=") {
            Some(path) => {
                let _ = OUTFILE.set(path.to_owned());
            }
            None => {
                eprintln!("qemu-icount: unknown argument {arg:?} (expected outfile=PATH)");
                return -1;
            }
        }
    }
    // SAFETY: plain registrations with callbacks of the signatures the API declares.
    unsafe {
        qemu_plugin_register_vcpu_tb_trans_cb(id, tb_trans);
        qemu_plugin_register_atexit_cb(id, at_exit, core::ptr::null_mut());
    }
    0
}
