//! Stack high-water mark by painting.
//!
//! cortex-m-rt reserves no stack: it grows down from `_stack_start` (top of RAM) towards
//! `_stack_end` (the end of static data). [`paint`] fills the unused part of that region with
//! a pattern at boot; [`used_bytes`] finds the lowest word no longer holding it. The result is
//! the deepest stack the run reached (a frame that happened to write the pattern itself would
//! be missed, which is one word's worth of error at most per coincidence).

/// The fill word; unlikely as data or as an address on this board.
const PAINT: u32 = 0xC0DE_5AFE;
/// Bytes left unpainted just below the painter's own stack pointer.
const MARGIN: usize = 64;

unsafe extern "C" {
    /// Lowest address of the stack region (cortex-m-rt's link.x).
    static _stack_end: u32;
    /// Highest address of the stack region, where the initial SP points (cortex-m-rt).
    static _stack_start: u32;
}

fn stack_pointer() -> usize {
    let sp: usize;
    // SAFETY: reads the stack pointer; no memory access, no side effects.
    unsafe {
        core::arch::asm!("mov {}, sp", out(reg) sp, options(nomem, nostack, preserves_flags))
    };
    sp
}

fn region() -> (usize, usize) {
    (
        core::ptr::addr_of!(_stack_end) as usize,
        core::ptr::addr_of!(_stack_start) as usize,
    )
}

/// Fills the free stack below the caller with [`PAINT`]. Call once, first thing in `main`.
#[inline(never)]
pub fn paint() {
    let (end, _) = region();
    let top = stack_pointer().saturating_sub(MARGIN) & !3;
    let mut p = end;
    while p < top {
        // SAFETY: `[_stack_end, sp - MARGIN)` is RAM that belongs to the stack region and lies
        // below every live frame (the stack grows down and nothing else runs), so no live data
        // is overwritten; `p` is word-aligned (`_stack_end` is 4-aligned by link.x).
        unsafe { core::ptr::write_volatile(p as *mut u32, PAINT) };
        p = p.saturating_add(4);
    }
}

/// Deepest stack use since [`paint`], in bytes from the top of the stack region.
pub fn used_bytes() -> usize {
    let (end, start) = region();
    let mut p = end;
    while p < start {
        // SAFETY: a word-aligned read inside the stack region, which is RAM.
        if unsafe { core::ptr::read_volatile(p as *const u32) } != PAINT {
            break;
        }
        p = p.saturating_add(4);
    }
    start.saturating_sub(p)
}
