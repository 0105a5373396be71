// Header: the robot picker and the status line (messages from the server).

/**
 * @param {{select: HTMLSelectElement, status: HTMLElement, store: object,
 *          onRobotChosen: (spec: string) => void}} options
 */
export function createHeader({ select, status, store, onRobotChosen }) {
  select.addEventListener("change", () => onRobotChosen(select.value));

  function render() {
    const { robots, robot, status: message } = store.get();
    const specs = robots.map((entry) => entry.name);
    if (robot && !specs.includes(robot.robot)) {
      specs.push(robot.robot);
    }
    if (select.dataset.specs !== specs.join("|")) {
      select.replaceChildren(...specs.map((spec) => new Option(spec, spec)));
      select.dataset.specs = specs.join("|");
    }
    if (robot) {
      select.value = robot.robot;
    }
    status.textContent = message.message;
    status.dataset.level = message.level;
    status.title = message.message;
  }

  store.subscribe(render, { keys: ["robots", "robot", "status"] });
  return { render };
}
