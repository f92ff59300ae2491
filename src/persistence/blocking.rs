//! Blocking use of the async flash library.
//!
//! `sequential-storage` is written with `async fn`s over the `embedded-storage-async` traits.
//! A simple firmware has neither an executor nor an async flash driver: its HAL offers the
//! blocking `embedded_storage::nor_flash::NorFlash`, whose operations finish before they return.
//! Two small pieces bridge that gap:
//!
//! - [`BlockingFlash`] presents a blocking flash through the async traits; each of its futures is
//!   ready at its first poll.
//! - [`block_on`] drives a future to completion by polling it with a waker that does nothing.
//!   Over a flash whose futures are always ready (a [`BlockingFlash`], a
//!   [`MockFlash`](super::MockFlash)) every poll makes progress, so the loop ends after the work
//!   is done. Over a truly async driver it busy-polls until the driver reports completion; an
//!   async firmware should rather call `sequential-storage` from its own executor.

use core::future::Future;
use core::task::{Context, Poll, Waker};

/// Runs `future` to completion on the calling thread (no heap, no interrupts, no `unsafe`).
///
/// ```
/// use lumisorb::persistence::block_on;
/// assert_eq!(block_on(async { 40 + 2 }), 42);
/// ```
pub fn block_on<F: Future>(future: F) -> F::Output {
    let mut future = core::pin::pin!(future);
    let mut cx = Context::from_waker(Waker::noop());
    loop {
        if let Poll::Ready(output) = future.as_mut().poll(&mut cx) {
            return output;
        }
        core::hint::spin_loop();
    }
}

/// A blocking NOR flash driver seen through the async `embedded-storage-async` traits.
///
/// Wrap the HAL's flash (`BlockingFlash(hal_flash)`) to hand it to the
/// [`FlashStore`](super::FlashStore).
#[derive(Clone, Debug, Default)]
pub struct BlockingFlash<F>(pub F);

impl<F: embedded_storage::nor_flash::ErrorType> embedded_storage::nor_flash::ErrorType
    for BlockingFlash<F>
{
    type Error = F::Error;
}

impl<F: embedded_storage::nor_flash::ReadNorFlash> embedded_storage_async::nor_flash::ReadNorFlash
    for BlockingFlash<F>
{
    const READ_SIZE: usize = F::READ_SIZE;

    async fn read(&mut self, offset: u32, bytes: &mut [u8]) -> Result<(), Self::Error> {
        self.0.read(offset, bytes)
    }

    fn capacity(&self) -> usize {
        self.0.capacity()
    }
}

impl<F: embedded_storage::nor_flash::NorFlash> embedded_storage_async::nor_flash::NorFlash
    for BlockingFlash<F>
{
    const WRITE_SIZE: usize = F::WRITE_SIZE;
    const ERASE_SIZE: usize = F::ERASE_SIZE;

    async fn erase(&mut self, from: u32, to: u32) -> Result<(), Self::Error> {
        self.0.erase(from, to)
    }

    async fn write(&mut self, offset: u32, bytes: &[u8]) -> Result<(), Self::Error> {
        self.0.write(offset, bytes)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::persistence::MockFlash;
    use embedded_storage_async::nor_flash::{NorFlash, ReadNorFlash};

    #[test]
    fn blocking_flash_through_async_traits() {
        let mut flash = BlockingFlash(MockFlash::<128, 32, 4>::new());
        block_on(flash.write(0, &[1, 2, 3, 4])).unwrap();
        let mut out = [0u8; 4];
        block_on(flash.read(0, &mut out)).unwrap();
        assert_eq!(out, [1, 2, 3, 4]);
        block_on(flash.erase(0, 32)).unwrap();
        block_on(flash.read(0, &mut out)).unwrap();
        assert_eq!(out, [0xFF; 4]);
    }

    #[test]
    fn block_on_polls_until_ready() {
        struct YieldTwice(u8);
        impl Future for YieldTwice {
            type Output = u8;
            fn poll(mut self: core::pin::Pin<&mut Self>, _: &mut Context<'_>) -> Poll<u8> {
                if self.0 == 2 {
                    Poll::Ready(self.0)
                } else {
                    self.0 += 1;
                    Poll::Pending
                }
            }
        }
        assert_eq!(block_on(YieldTwice(0)), 2);
    }
}
