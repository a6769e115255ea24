use super::*;
use std::os::unix::fs::symlink;

/// A fresh scratch folder for one test.
fn scratch(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("logtrim-out-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

fn entries(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    v.sort();
    v
}

#[test]
fn dropped_file_leaves_nothing() {
    let dir = scratch("drop");
    let target = dir.join("a.txt");
    {
        let mut f = AtomicFile::create(&target).unwrap();
        f.write_all(b"half").unwrap();
    }
    assert!(!target.exists());
    assert!(entries(&dir).is_empty());
    write_atomic(&target, b"whole").unwrap();
    assert_eq!(std::fs::read(&target).unwrap(), b"whole");
    write_atomic_deferred(&target, b"again").unwrap();
    sync_all_deferred(&dir).unwrap();
    assert_eq!(std::fs::read(&target).unwrap(), b"again");
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn a_failed_rename_removes_its_temporary_file() {
    // The target becomes a non-empty folder after the temporary file was made: the rename fails, the
    // error is returned and no temporary file is left beside it.
    let dir = scratch("rename");
    let target = dir.join("out.json");
    let mut f = AtomicFile::create(&target).unwrap();
    f.write_all(b"{}").unwrap();
    std::fs::create_dir(&target).unwrap();
    std::fs::write(target.join("keep"), b"x").unwrap();
    assert!(f.commit().is_err());
    assert_eq!(entries(&dir), ["out.json"]);
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn a_folder_as_output_is_refused_before_anything_is_written() {
    let dir = scratch("folder");
    let e = AtomicFile::create(&dir).unwrap_err();
    assert_eq!(e.kind(), io::ErrorKind::IsADirectory, "{e}");
    assert!(entries(&dir).is_empty());
    let plan = Plan::default();
    let e = plan.file(&dir).unwrap_err().to_string();
    assert!(e.contains("is a folder"), "{e}");
    let e = plan.file(&dir.join("missing/out.json")).unwrap_err().to_string();
    assert!(e.contains("does not exist"), "{e}");
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn a_device_is_written_in_place_and_its_write_errors_are_errors() {
    // /dev/null takes everything; /dev/full refuses with "no space left on device" (both Linux devices).
    write_atomic(Path::new("/dev/null"), b"discarded").unwrap();
    let e = write_atomic(Path::new("/dev/full"), &[7u8; 100]).unwrap_err();
    assert_eq!(e.raw_os_error(), Some(rustix::io::Errno::NOSPC.raw_os_error()), "{e}");
    for dev in ["/dev/null", "/dev/full"] {
        let m = std::fs::symlink_metadata(dev).unwrap();
        assert!(m.file_type().is_char_device(), "{dev} was replaced");
    }
    assert_eq!(Plan::default().file(Path::new("/dev/null")).map_err(|e| e.to_string()), Ok(()));
}

#[test]
fn a_fifo_without_a_reader_is_refused_not_waited_on() {
    let dir = scratch("fifo");
    let fifo = dir.join("pipe");
    rustix::fs::mkfifoat(rustix::fs::CWD, &fifo, rustix::fs::Mode::from_raw_mode(0o600)).unwrap();
    let e = AtomicFile::create(&fifo).unwrap_err().to_string();
    assert!(e.contains("no process reads"), "{e}");
    assert!(std::fs::symlink_metadata(&fifo).unwrap().file_type().is_fifo());
    // With a reader, the bytes go through the FIFO.
    let reader = {
        let fifo = fifo.clone();
        std::thread::spawn(move || {
            let mut f = File::open(fifo).unwrap();
            let mut s = String::new();
            io::Read::read_to_string(&mut f, &mut s).unwrap();
            s
        })
    };
    let mut tries = 0;
    let f = loop {
        match AtomicFile::create(&fifo) {
            Ok(f) => break f,
            Err(_) if tries < 500 => {
                tries += 1;
                std::thread::sleep(std::time::Duration::from_millis(10));
            }
            Err(e) => panic!("{e}"),
        }
    };
    let mut f = f;
    f.write_all(b"through").unwrap();
    f.commit().unwrap();
    assert_eq!(reader.join().unwrap(), "through");
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn a_symlink_output_writes_its_target_and_stays_a_link() {
    let dir = scratch("link");
    let real = dir.join("real.json");
    std::fs::write(&real, b"old").unwrap();
    let link = dir.join("link.json");
    symlink("real.json", &link).unwrap();
    write_atomic(&link, b"new").unwrap();
    assert!(std::fs::symlink_metadata(&link).unwrap().file_type().is_symlink());
    assert_eq!(std::fs::read(&real).unwrap(), b"new");
    // A dangling link: its target is created.
    let dangling = dir.join("dangling");
    symlink("made.json", &dangling).unwrap();
    write_atomic(&dangling, b"made").unwrap();
    assert_eq!(std::fs::read(dir.join("made.json")).unwrap(), b"made");
    assert!(std::fs::symlink_metadata(&dangling).unwrap().file_type().is_symlink());
    // A loop of links is refused.
    symlink("loop-b", dir.join("loop-a")).unwrap();
    symlink("loop-a", dir.join("loop-b")).unwrap();
    let e = write_atomic(&dir.join("loop-a"), b"x").unwrap_err().to_string();
    assert!(e.contains("symbolic links"), "{e}");
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn an_output_that_is_an_input_is_refused_by_identity() {
    let dir = scratch("same");
    let input = dir.join("COEFFS.json");
    std::fs::write(&input, b"{}").unwrap();
    let hard = dir.join("hard.json");
    std::fs::hard_link(&input, &hard).unwrap();
    let soft = dir.join("soft.json");
    symlink("COEFFS.json", &soft).unwrap();
    let plan = Plan::with_inputs([input.as_path()]);
    for out in [&input, &hard, &soft, &dir.join(".").join("COEFFS.json")] {
        let e = plan.file(out).unwrap_err();
        assert!(matches!(e, OutputError::SameAsInput { .. }), "{out:?}: {e}");
        assert!(e.to_string().contains("never overwritten"), "{e}");
    }
    assert!(plan.file(&dir.join("other.json")).is_ok());
    assert_eq!(std::fs::read(&input).unwrap(), b"{}");
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn an_output_folder_must_be_a_folder() {
    let dir = scratch("dirs");
    let file = dir.join("report");
    std::fs::write(&file, b"x").unwrap();
    let plan = Plan::default();
    assert!(plan.dir(&dir).is_ok());
    assert!(plan.dir(&dir.join("new/deeper")).is_ok());
    let e = plan.dir(&file).unwrap_err().to_string();
    assert!(e.contains("is a file: expected a folder"), "{e}");
    let e = plan.dir(&file.join("sub")).unwrap_err().to_string();
    assert!(e.contains("is a file, so the folder cannot be made"), "{e}");
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn a_group_appears_whole_or_not_at_all() {
    let dir = scratch("group");
    let (a, b) = (dir.join("u.json"), dir.join("u.bin"));
    let mut g = Group::new();
    let ia = g.add(AtomicFile::create(&a).unwrap());
    let ib = g.add(AtomicFile::create(&b).unwrap());
    g.file(ia).unwrap().write_all(b"json").unwrap();
    g.file(ib).unwrap().write_all(b"bin").unwrap();
    g.commit(true).unwrap();
    assert_eq!(entries(&dir), ["u.bin", "u.json"]);
    // The second rename fails (its target turned into a non-empty folder): the first is removed too.
    let (c, d) = (dir.join("v.json"), dir.join("v.bin"));
    let mut g = Group::new();
    g.add(AtomicFile::create(&c).unwrap());
    g.add(AtomicFile::create(&d).unwrap());
    std::fs::create_dir(&d).unwrap();
    std::fs::write(d.join("keep"), b"x").unwrap();
    assert!(g.commit(false).is_err());
    assert_eq!(entries(&dir), ["u.bin", "u.json", "v.bin"]);
    assert!(std::fs::metadata(&d).unwrap().is_dir());
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn temporary_names_are_distinct_and_registered_while_in_flight() {
    let dir = scratch("names");
    let target = dir.join("same.json");
    let a = AtomicFile::create(&target).unwrap();
    let b = AtomicFile::create(&target).unwrap();
    assert_ne!(a.tmp, b.tmp);
    {
        let list = in_flight();
        assert!(list.contains(a.tmp.as_ref().unwrap()) && list.contains(b.tmp.as_ref().unwrap()));
    }
    let (ta, tb) = (a.tmp.clone().unwrap(), b.tmp.clone().unwrap());
    a.commit().unwrap();
    drop(b);
    let list = in_flight();
    assert!(!list.contains(&ta) && !list.contains(&tb));
    drop(list);
    assert_eq!(entries(&dir), ["same.json"]);
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn a_group_of_byte_buffers_appears_whole_or_not_at_all() {
    let dir = std::env::temp_dir().join(format!("logtrim-group-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let (a, b) = (dir.join("u.json"), dir.join("u.bin"));
    write_group_deferred(&[(a.clone(), b"{}".to_vec()), (b.clone(), vec![1, 2])]).unwrap();
    assert_eq!(std::fs::read(&b).unwrap(), [1, 2]);
    // The second target is a folder: nothing of the group stays, no temporary file either.
    std::fs::remove_file(&a).unwrap();
    std::fs::remove_file(&b).unwrap();
    std::fs::create_dir(&b).unwrap();
    std::fs::write(b.join("x"), b"x").unwrap();
    assert!(write_group_deferred(&[(a.clone(), b"{}".to_vec()), (b.clone(), vec![1])]).is_err());
    assert!(!a.exists());
    let names: Vec<String> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert_eq!(names, ["u.bin"], "only the folder in the way remains");
    std::fs::remove_dir_all(&dir).unwrap();
}
