//! exobound-sdk: everything an author of a process module depends on.
//!
//! Why this exists: a laboratory group that has measured a desorption or
//! sputtering yield should be able to turn it into a module for the
//! exobound engine without learning the engine. They implement a trait for
//! one of four roles over batches of plain records, describe the law in a
//! `const` [`Manifest`], and register it with [`export_process!`]. The
//! result builds natively (for unit tests) and to `wasm32-unknown-unknown`
//! (for the sandboxed engine) from the same source, with bit-identical
//! numbers, because both sides use [`math`] and the counter-based [`Rng`].
//!
//! The public surface is:
//! - roles: [`Process`], [`Source`], [`Loss`], [`SurfaceInteraction`], [`ReservoirProcess`],
//!   each with one-record methods (`launch_one`, ...) and batch methods whose
//!   default bodies loop over the records (see [`roles`]);
//! - records: [`CellState`], [`LaunchRequest`], [`Velocity`], [`InFlight`],
//!   [`Impact`], [`Outcome`], [`OutcomeKind`], [`RngKey`];
//! - randomness: [`Rng`] and its samplers ([`sample`]);
//! - [`math`] and [`constants`];
//! - manifests: [`Manifest`], [`ParamSpec`], [`ParamKind`], [`TableColumn`], [`Origin`],
//!   [`Input`], [`ReferencePoint`], [`Check`], [`Value`], [`Role`], [`Pool`];
//! - parameters: [`Params`], [`ParamValue`]; table parameters: [`TableRef`] and the
//!   interpolating [`Curve`] ([`table`]); errors: [`ProcessError`], [`ErrorCode`];
//! - for tests, with the `testing` feature: `testing` (build a law as the
//!   host does, rerun the reference points, KS tests, the batch check).
//!
//! What only the host and the SDK's plumbing use (the decoded manifest,
//! byte views of records, field access by name, the reference-check
//! protocol) is in [`wire`], not here.
//!
//! Dependencies are serde, rmp-serde and libm only; the host depends on
//! this crate, never the reverse.

pub mod constants;
pub mod launch_law;
pub mod manifest;
pub mod math;
pub mod params;
pub mod records;
pub mod rng;
pub mod roles;
pub mod sample;
pub mod table;

pub mod wire;

#[cfg(feature = "testing")]
pub mod testing;

#[doc(hidden)]
pub mod abi;

pub use launch_law::{DirectionLaw, EnergyCutoff, LaunchLaw, Quantity, SpeedLaw};
pub use manifest::{
    Check, Input, Manifest, Origin, ParamKind, ParamSpec, Pool, ReferencePoint, Role, TableColumn,
    Value,
};
pub use params::{ParamValue, Params};
pub use records::{
    CellState, Impact, InFlight, LaunchRequest, Outcome, OutcomeKind, RngKey, Velocity, flags,
    stream,
};
pub use rng::Rng;
pub use roles::{
    ErrorCode, Loss, Process, ProcessError, ReservoirProcess, Source, SurfaceInteraction,
};
pub use sample::Direction;
pub use table::{Curve, TableRef};
// Wire-only types, kept reachable from the root (hidden from the
// documentation) for code written before they moved to `wire`.
#[doc(hidden)]
pub use wire::{ManifestInfo, NamedFields, ParamInfo, ReferenceInfo};

/// ABI version implemented by this SDK: `major.minor.patch` in ASCII.
/// 1.1 adds table parameters. A module is stamped in its `exobound:abi`
/// section with the oldest version that can run it: [`ABI_VERSION`] if it
/// declares a table parameter, else [`ABI_BASE_VERSION`], so a module that
/// does not use tables still loads in a host that knows only ABI 1.0.
pub const ABI_VERSION: &str = "1.1.0";
/// [`ABI_VERSION`] as the bytes of the custom section.
#[doc(hidden)]
pub const ABI_VERSION_BYTES: [u8; 5] = *b"1.1.0";
/// The version stamped on modules that declare no table parameter.
pub const ABI_BASE_VERSION: &str = "1.0.0";
/// [`ABI_BASE_VERSION`] as the bytes of the custom section.
#[doc(hidden)]
pub const ABI_BASE_VERSION_BYTES: [u8; 5] = *b"1.0.0";
/// Name of the custom section holding the ABI version.
pub const ABI_SECTION: &str = "exobound:abi";
/// Name of the custom section holding the MessagePack manifest.
pub const MANIFEST_SECTION: &str = "exobound:manifest";

/// Registers a law as a process module.
///
/// ```ignore
/// exobound_sdk::export_process!(MyLaw: Source);
/// exobound_sdk::export_process!(MyOtherLaw: Loss, SurfaceInteraction);
/// ```
///
/// List every role the type implements, exactly as in `MANIFEST.roles`; a
/// mismatch, a missing trait impl or an unknown role name is a compile
/// error. On `wasm32` the macro emits the ABI v1 exports and the
/// `exobound:abi` and `exobound:manifest` custom sections; on other targets
/// it emits only the compile-time checks, and the type is called directly.
/// The `exobound:abi` section holds the oldest ABI version that can run the
/// module (see [`ABI_VERSION`]).
/// Invoke it once per `cdylib`.
#[macro_export]
macro_rules! export_process {
    ($law:ty : $($role:ident),+ $(,)?) => {
        const _: () = $crate::abi::check_roles(
            <$law as $crate::Process>::MANIFEST.roles,
            &[$($crate::Role::$role),+],
        );
        const _: () = {
            // Type checks on every target: each listed role must be implemented.
            $( $crate::__require_role!($role, $law); )+
        };
        #[cfg(target_arch = "wasm32")]
        const _: () = {
            static EXOBOUND_STATE: $crate::abi::Slot<$law> = $crate::abi::Slot::new();
            const LAUNCH_LAWS: &[$crate::LaunchLaw] = $crate::__launch_laws!($law; $($role),+);
            const MANIFEST_LEN: usize = $crate::manifest::encoded_len_with(
                &<$law as $crate::Process>::MANIFEST,
                LAUNCH_LAWS,
            );
            #[unsafe(link_section = "exobound:manifest")]
            #[used]
            static EXOBOUND_MANIFEST: [u8; MANIFEST_LEN] = $crate::manifest::encode_with::<
                MANIFEST_LEN,
            >(
                &<$law as $crate::Process>::MANIFEST, LAUNCH_LAWS
            );
            #[unsafe(link_section = "exobound:abi")]
            #[used]
            static EXOBOUND_ABI: [u8; 5] =
                $crate::abi::version_bytes(&<$law as $crate::Process>::MANIFEST);

            #[unsafe(no_mangle)]
            pub extern "C" fn exobound_alloc(size: u32, align: u32) -> u32 {
                $crate::abi::alloc(size as usize, align as usize) as usize as u32
            }
            #[unsafe(no_mangle)]
            pub unsafe extern "C" fn exobound_free(ptr: u32, size: u32, align: u32) {
                unsafe { $crate::abi::free(ptr as usize as *mut u8, size as usize, align as usize) }
            }
            #[unsafe(no_mangle)]
            pub unsafe extern "C" fn exobound_init(ptr: u32, len: u32) -> i32 {
                unsafe { $crate::abi::init(&EXOBOUND_STATE, ptr as usize as *const u8, len as usize) }
            }
            #[unsafe(no_mangle)]
            pub unsafe extern "C" fn exobound_last_error(buf: u32, cap: u32) -> u32 {
                unsafe { $crate::abi::last_error(buf as usize as *mut u8, cap as usize) as u32 }
            }
            $( $crate::__export_role!($role, $law, EXOBOUND_STATE); )+
        };
    };
    ($($other:tt)*) => {
        compile_error!(
            "export_process! takes a type and its roles, e.g. `export_process!(MyLaw: Source)` \
             or `export_process!(MyLaw: Loss, SurfaceInteraction)`"
        );
    };
}

/// The `LAUNCH_LAWS` of a law whose roles include `Source`, else none.
#[doc(hidden)]
#[macro_export]
macro_rules! __launch_laws {
    ($law:ty; Source $(, $rest:ident)*) => {
        <$law as $crate::Source>::LAUNCH_LAWS
    };
    ($law:ty; $other:ident $(, $rest:ident)*) => {
        $crate::__launch_laws!($law; $($rest),*)
    };
    ($law:ty;) => {
        &[]
    };
}

#[doc(hidden)]
#[macro_export]
macro_rules! __require_role {
    (Source, $law:ty) => {
        let _ = <$law as $crate::Source>::launch;
    };
    (Loss, $law:ty) => {
        let _ = <$law as $crate::Loss>::loss_rate;
    };
    (SurfaceInteraction, $law:ty) => {
        let _ = <$law as $crate::SurfaceInteraction>::land;
    };
    (ReservoirProcess, $law:ty) => {
        let _ = <$law as $crate::ReservoirProcess>::exchange;
    };
    ($other:ident, $law:ty) => {
        compile_error!(concat!(
            "export_process!: unknown role `",
            stringify!($other),
            "`; the roles are Source, Loss, SurfaceInteraction and ReservoirProcess"
        ));
    };
}

#[doc(hidden)]
#[macro_export]
macro_rules! __export_role {
    (Source, $law:ty, $state:ident) => {
        #[unsafe(no_mangle)]
        pub unsafe extern "C" fn exobound_release_rate(input: u32, n: u32, output: u32) -> i32 {
            unsafe {
                $crate::abi::batch(
                    &$state,
                    input as usize as *const $crate::CellState,
                    n as usize,
                    output as usize as *mut f64,
                    <$law as $crate::Source>::release_rate,
                )
            }
        }
        #[unsafe(no_mangle)]
        pub unsafe extern "C" fn exobound_launch(input: u32, n: u32, output: u32) -> i32 {
            unsafe {
                $crate::abi::batch(
                    &$state,
                    input as usize as *const $crate::LaunchRequest,
                    n as usize,
                    output as usize as *mut $crate::Velocity,
                    <$law as $crate::Source>::launch,
                )
            }
        }
    };
    (Loss, $law:ty, $state:ident) => {
        #[unsafe(no_mangle)]
        pub unsafe extern "C" fn exobound_loss_rate(input: u32, n: u32, output: u32) -> i32 {
            unsafe {
                $crate::abi::batch(
                    &$state,
                    input as usize as *const $crate::InFlight,
                    n as usize,
                    output as usize as *mut f64,
                    <$law as $crate::Loss>::loss_rate,
                )
            }
        }
    };
    (SurfaceInteraction, $law:ty, $state:ident) => {
        #[unsafe(no_mangle)]
        pub unsafe extern "C" fn exobound_land(input: u32, n: u32, output: u32) -> i32 {
            unsafe {
                $crate::abi::batch(
                    &$state,
                    input as usize as *const $crate::Impact,
                    n as usize,
                    output as usize as *mut $crate::Outcome,
                    <$law as $crate::SurfaceInteraction>::land,
                )
            }
        }
    };
    (ReservoirProcess, $law:ty, $state:ident) => {
        #[unsafe(no_mangle)]
        pub unsafe extern "C" fn exobound_exchange(input: u32, n: u32, output: u32) -> i32 {
            unsafe {
                $crate::abi::batch(
                    &$state,
                    input as usize as *const $crate::CellState,
                    n as usize,
                    output as usize as *mut f64,
                    <$law as $crate::ReservoirProcess>::exchange,
                )
            }
        }
    };
    ($other:ident, $law:ty, $state:ident) => {};
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn abi_version_bytes_match() {
        assert_eq!(ABI_VERSION.as_bytes(), &ABI_VERSION_BYTES);
        assert_eq!(ABI_BASE_VERSION.as_bytes(), &ABI_BASE_VERSION_BYTES);
    }
}
