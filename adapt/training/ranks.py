"""Work done once, on the main process, with every process getting its result or its error.

With several processes a failure on rank 0 alone (a full disk while saving, a refused resume) would leave the
other ranks waiting in their next collective until the job is killed; ``on_main`` hands them the error instead,
so every rank ends with the same one-line message.
"""

from __future__ import annotations

from typing import Callable, TypeVar

import torch

from adapt.common.errors import ConfigError, InputError, UserError

T = TypeVar("T")
_ERRORS = {cls.__name__: cls for cls in (ConfigError, InputError, UserError)}


def on_main(accelerator, work: Callable[[], T]) -> T:
    """``work()`` on the main process only; its (picklable) result on every process. A collective: every rank
    calls it at the same point. A ``UserError`` on the main process is raised on every process."""
    if accelerator.num_processes == 1:
        return work()
    from accelerate.utils import broadcast_object_list

    payload: list = [None, None, None]
    failure: BaseException | None = None
    if accelerator.is_main_process:
        try:
            payload = [work(), None, None]
        except UserError as exc:
            failure, payload = exc, [None, type(exc).__name__, str(exc)]
        except BaseException as exc:  # still reach the broadcast, or the other ranks wait for ever
            failure, payload = exc, [None, "RuntimeError", f"rank 0 failed: {type(exc).__name__}: {exc}"]
    result, error_type, message = broadcast_object_list(payload)  # sync point: rank 0's result or error
    if failure is not None:
        raise failure
    if error_type is not None:
        raise _ERRORS.get(error_type, RuntimeError)(message)
    return result


def broadcast_parameters(accelerator, params: list[torch.nn.Parameter]) -> None:
    """Copy the main process's values of ``params`` to every process (in place)."""
    if accelerator.num_processes == 1:
        return
    import torch.distributed as dist

    for param in params:  # sync point, one per tensor
        dist.broadcast(param.data, src=0)
